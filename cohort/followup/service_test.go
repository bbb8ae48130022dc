package followup

import (
	"errors"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"
)

// studyCalendar is a fictional study in Berlin with a holiday on Friday
// 2026-04-03. The expected due days below were laid out by hand on that
// calendar from the rules in NextDue's comment (computed; weekdays checked
// against Go's time package by mustWeekday); the settings are our
// illustrative defaults, not values from any source.
func studyCalendar(tb testing.TB) (Calendar, *time.Location) {
	tb.Helper()
	loc := mustLoad(tb, "Europe/Berlin")
	mustWeekday(tb, "2026-04-03", time.Friday)
	mustWeekday(tb, "2026-04-13", time.Monday)
	return NewCalendar(loc, day(tb, "2026-04-03")), loc
}

func attempt(tb testing.TB, loc *time.Location, when string, o Outcome) Attempt {
	tb.Helper()
	return Attempt{At: at(tb, loc, when), Channel: ChannelPhone, Outcome: o}
}

func TestNextDue(t *testing.T) {
	cal, loc := studyCalendar(t)
	sl := DefaultServiceLevels() // 2 working days, 5 attempts over 14 calendar days, 5, 14, 7, 3 working days
	flag := at(t, loc, "2026-04-02 10:00")
	a := func(when string, o Outcome) Attempt { return attempt(t, loc, when, o) }
	na := OutcomeNoAnswer

	tests := []struct {
		name   string
		facts  CaseFacts
		sl     ServiceLevels
		action Action
		due    string // due day; "" when nothing is due
	}{
		// Thursday flag, Friday holiday: working days Mon 6, Tue 7.
		{"open: first attempt in 2 working days", CaseFacts{State: Open, FlaggedAt: flag}, sl, ActionFirstContact, "2026-04-07"},
		{"contacting without attempts behaves as open", CaseFacts{State: Contacting, FlaggedAt: flag}, sl, ActionFirstContact, "2026-04-07"},
		// First attempt Tue 7; the next is planned ceil(14/4) = 4 days later,
		// Sat 11, moved to Mon 13.
		{"contacting: second attempt paced", CaseFacts{State: Contacting, FlaggedAt: flag,
			Attempts: []Attempt{a("2026-04-07 11:00", na)}}, sl, ActionNextAttempt, "2026-04-13"},
		// Third attempt planned ceil(2*14/4) = 7 days after the first: Tue 14.
		{"contacting: third attempt paced", CaseFacts{State: Contacting, FlaggedAt: flag,
			Attempts: []Attempt{a("2026-04-07 11:00", na), a("2026-04-13 09:00", OutcomeMessageLeft)}}, sl, ActionNextAttempt, "2026-04-14"},
		// Late staff: the plan says Tue 14 but the last attempt was Thu 16, so
		// the next is due no earlier than the following working day, Fri 17.
		{"contacting: never before the next working day", CaseFacts{State: Contacting, FlaggedAt: flag,
			Attempts: []Attempt{a("2026-04-07 11:00", na), a("2026-04-16 09:00", na)}}, sl, ActionNextAttempt, "2026-04-17"},
		{"contacting: five attempts within 14 days are not enough", CaseFacts{State: Contacting, FlaggedAt: flag,
			Attempts: []Attempt{a("2026-04-07 09:00", na), a("2026-04-08 09:00", na), a("2026-04-09 09:00", na),
				a("2026-04-10 09:00", na), a("2026-04-13 09:00", na)}}, sl, ActionNextAttempt, "2026-04-21"},
		{"contacting: five unanswered over 14 days suggest closing", CaseFacts{State: Contacting, FlaggedAt: flag,
			Attempts: []Attempt{a("2026-04-21 16:00", na), a("2026-04-07 11:00", na), a("2026-04-13 09:00", na),
				a("2026-04-14 09:00", OutcomeWrongNumber), a("2026-04-17 09:00", na)}}, sl, ActionSuggestUnreachable, "2026-04-21"},
		{"contacting: a decline is not an unanswered attempt", CaseFacts{State: Contacting, FlaggedAt: flag,
			Attempts: []Attempt{a("2026-04-07 11:00", na), a("2026-04-13 09:00", na), a("2026-04-14 09:00", na),
				a("2026-04-17 09:00", na), a("2026-04-21 16:00", OutcomeDeclined)}}, sl, ActionNextAttempt, "2026-04-21"},
		{"contacting: one attempt and a zero window give up at once", CaseFacts{State: Contacting, FlaggedAt: flag,
			Attempts: []Attempt{a("2026-04-07 11:00", na)}}, ServiceLevels{MaxAttempts: 1}, ActionSuggestUnreachable, "2026-04-07"},
		{"contacting: one attempt but a 7-day window", CaseFacts{State: Contacting, FlaggedAt: flag,
			Attempts: []Attempt{a("2026-04-07 11:00", na)}}, ServiceLevels{MaxAttempts: 1, GiveUpAfterDays: 7}, ActionNextAttempt, "2026-04-14"},
		// Reached Friday 10th: 5 working days, Mon 13 to Fri 17; reached Mon
		// 13th: Tue 14 to Fri 17 and Mon 20.
		{"reached: send the recorder", CaseFacts{State: Reached, FlaggedAt: flag, ReachedAt: at(t, loc, "2026-04-10 15:00")}, sl, ActionSendRecorder, "2026-04-17"},
		{"reached: deadline on a weekend moves on", CaseFacts{State: Reached, FlaggedAt: flag, ReachedAt: at(t, loc, "2026-04-13 15:00")}, sl, ActionSendRecorder, "2026-04-20"},
		{"reached: missing time falls back to the reaching attempt", CaseFacts{State: Reached, FlaggedAt: flag,
			Attempts: []Attempt{a("2026-04-07 11:00", na), a("2026-04-13 15:00", OutcomeReached)}}, sl, ActionSendRecorder, "2026-04-20"},
		// Flag Thu 2nd, holiday Fri 3rd: Mon 6 to Fri 10.
		{"reached: nothing recorded falls back to the flag", CaseFacts{State: Reached, FlaggedAt: flag}, sl, ActionSendRecorder, "2026-04-10"},
		// Sent Mon 13th: back within 14 working days, Tue 14 to Fri 1 May.
		{"recorder sent: recording due back", CaseFacts{State: RecorderSent, FlaggedAt: flag, RecorderSentAt: at(t, loc, "2026-04-13 12:00"),
			Attempts: []Attempt{a("2026-04-07 11:00", na), a("2026-04-08 11:00", na), a("2026-04-09 11:00", na),
				a("2026-04-10 11:00", na), a("2026-04-11 11:00", OutcomeReached)}}, sl, ActionAwaitRecording, "2026-05-01"},
		// First chase Tue 28th; next planned 4 days later, Sat 2 May -> Mon 4 May.
		{"recorder sent: chase paced", CaseFacts{State: RecorderSent, FlaggedAt: flag, RecorderSentAt: at(t, loc, "2026-04-13 12:00"),
			Attempts: []Attempt{a("2026-04-28 10:00", na)}}, sl, ActionChaseRecording, "2026-05-04"},
		// Reached on Wed 29th (after the due day): next chase one interval
		// (4 days) later, Sun 3 May -> Mon 4 May.
		{"recorder sent: a conversation restarts the wait", CaseFacts{State: RecorderSent, FlaggedAt: flag, RecorderSentAt: at(t, loc, "2026-04-13 12:00"),
			Attempts: []Attempt{a("2026-04-28 10:00", na), a("2026-04-29 10:00", OutcomeReached)}}, sl, ActionAwaitRecording, "2026-05-04"},
		{"recorder sent: a conversation before the due day keeps the due day", CaseFacts{State: RecorderSent, FlaggedAt: flag, RecorderSentAt: at(t, loc, "2026-04-13 12:00"),
			Attempts: []Attempt{a("2026-04-14 10:00", OutcomeReached)}}, sl, ActionAwaitRecording, "2026-05-01"},
		{"recorder sent: five unanswered chases over 14 days", CaseFacts{State: RecorderSent, FlaggedAt: flag, RecorderSentAt: at(t, loc, "2026-04-13 12:00"),
			Attempts: []Attempt{a("2026-04-28 10:00", na), a("2026-05-04 10:00", na), a("2026-05-05 10:00", na),
				a("2026-05-08 10:00", na), a("2026-05-12 10:00", na)}}, sl, ActionSuggestUnreachable, "2026-05-12"},
		// Received Thu 30th: over-read within 7 working days, Fri 1 May, Mon 4
		// to Fri 8 and Mon 11 May.
		{"recording received: over-read", CaseFacts{State: RecordingReceived, FlaggedAt: flag, RecordingReceivedAt: at(t, loc, "2026-04-30 09:00")}, sl, ActionOverRead, "2026-05-11"},
		// Over-read Fri 8 May: 3 working days, Mon 11 to Wed 13 May.
		{"over-read: refer or close", CaseFacts{State: OverRead, FlaggedAt: flag, RecordingReceivedAt: at(t, loc, "2026-04-30 09:00"),
			OverReadAt: at(t, loc, "2026-05-08 17:00")}, sl, ActionReferOrClose, "2026-05-13"},
		// Received Thu 30th: Fri 1 May, Mon 4, Tue 5.
		{"over-read: missing time falls back to receipt", CaseFacts{State: OverRead, FlaggedAt: flag,
			RecordingReceivedAt: at(t, loc, "2026-04-30 09:00")}, sl, ActionReferOrClose, "2026-05-05"},
		{"referred: nothing due", CaseFacts{State: Referred, FlaggedAt: flag}, sl, "", ""},
		{"closed: nothing due", CaseFacts{State: ClosedUnreachable, FlaggedAt: flag}, sl, "", ""},
		{"unknown state: nothing due", CaseFacts{State: "lost", FlaggedAt: flag}, sl, "", ""},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			action, due, ok := NextDue(tt.facts, tt.sl, cal)
			if tt.due == "" {
				if ok || action != "" || !due.IsZero() {
					t.Errorf("got %q %s %v, want nothing due", action, due, ok)
				}
				return
			}
			if !ok || action != tt.action {
				t.Errorf("action %q (ok %v), want %q", action, ok, tt.action)
			}
			if want := endOfDay(day(t, tt.due), loc); !due.Equal(want) {
				t.Errorf("due %s, want %s", due.In(loc), want)
			}
		})
	}
}

// TestPacingMeetsBothLimits simulates a coordinator who makes every attempt on
// its due day: closing is then suggested right after the MaxAttempts-th
// attempt (the second when MaxAttempts is 1 and there is a window), never
// before, and every deadline is a working day that moves forward.
func TestPacingMeetsBothLimits(t *testing.T) {
	cal, loc := studyCalendar(t)
	for _, sl := range []ServiceLevels{
		DefaultServiceLevels(),
		{FirstContactWorkingDays: 1, MaxAttempts: 3, GiveUpAfterDays: 10},
		{FirstContactWorkingDays: 0, MaxAttempts: 6, GiveUpAfterDays: 3},
		{FirstContactWorkingDays: 2, MaxAttempts: 1, GiveUpAfterDays: 5},
		{FirstContactWorkingDays: 2, MaxAttempts: 4, GiveUpAfterDays: 0},
	} {
		for startDay := 1; startDay <= 7; startDay++ {
			facts := CaseFacts{State: Open, FlaggedAt: time.Date(2026, 3, 29+startDay, 18, 0, 0, 0, loc)}
			var prev time.Time
			for step := 0; ; step++ {
				action, due, ok := NextDue(facts, sl, cal)
				if !ok {
					t.Fatalf("%+v: nothing due after %d attempts", sl, len(facts.Attempts))
				}
				// The suggestion falls due on the last attempt's day, which
				// may be that attempt's own deadline; attempts move forward.
				later := due.After(prev) || action == ActionSuggestUnreachable && due.Equal(prev)
				if !cal.IsWorkingDay(cal.DueDay(due)) || !later {
					t.Fatalf("%+v: deadline %s not a later working day (previous %s)", sl, due, prev)
				}
				prev = due
				if action == ActionSuggestUnreachable {
					// One attempt spans no days, so with MaxAttempts 1 and a
					// window a second attempt at the window's end is needed.
					want := sl.MaxAttempts
					if want == 1 && sl.GiveUpAfterDays > 0 {
						want = 2
					}
					if len(facts.Attempts) != want {
						t.Errorf("%+v from %s: suggested after %d attempts", sl, facts.FlaggedAt, len(facts.Attempts))
					}
					first, last := cal.DateOf(facts.Attempts[0].At), cal.DateOf(facts.Attempts[len(facts.Attempts)-1].At)
					if last.DaysSince(first) < sl.GiveUpAfterDays {
						t.Errorf("%+v: suggested after %d days", sl, last.DaysSince(first))
					}
					break
				}
				if step > 3*sl.MaxAttempts+3 {
					t.Fatalf("%+v: no suggestion after %d attempts", sl, len(facts.Attempts))
				}
				// Attempt at 23:00 on the due day (after the 18:00 flag), unanswered.
				d := cal.DueDay(due)
				facts.Attempts = append(facts.Attempts, Attempt{At: time.Date(d.Year, d.Month, d.Day, 23, 0, 0, 0, loc), Channel: ChannelText, Outcome: OutcomeNoAnswer})
				next, move, err := AfterAttempt(facts.State, OutcomeNoAnswer)
				if err != nil {
					t.Fatal(err)
				}
				if move {
					facts.State = next
				}
			}
		}
	}
}

func TestServiceLevelsValidate(t *testing.T) {
	if err := DefaultServiceLevels().Validate(); err != nil {
		t.Fatalf("defaults invalid: %v", err)
	}
	tests := []struct {
		name  string
		edit  func(*ServiceLevels)
		field string
	}{
		{"negative first contact", func(s *ServiceLevels) { s.FirstContactWorkingDays = -1 }, "first_contact_working_days"},
		{"no attempts", func(s *ServiceLevels) { s.MaxAttempts = 0 }, "max_attempts"},
		{"too many attempts", func(s *ServiceLevels) { s.MaxAttempts = 101 }, "max_attempts"},
		{"negative give-up", func(s *ServiceLevels) { s.GiveUpAfterDays = -2 }, "give_up_after_days"},
		{"typing slip", func(s *ServiceLevels) { s.RecordingBackWithinDays = 1400 }, "recording_back_within_days"},
		{"negative send", func(s *ServiceLevels) { s.RecorderSendWithinDays = -1 }, "recorder_send_within_days"},
		{"negative over-read", func(s *ServiceLevels) { s.OverReadWithinDays = -1 }, "over_read_within_days"},
		{"negative refer", func(s *ServiceLevels) { s.ReferOrCloseWithinDays = -1 }, "refer_or_close_within_days"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			s := DefaultServiceLevels()
			tt.edit(&s)
			var ve *cohort.ValidationError
			if err := s.Validate(); !errors.As(err, &ve) || len(ve.Fields) != 1 || ve.Fields[tt.field] == "" {
				t.Errorf("Validate() = %v, want one problem with %s", err, tt.field)
			}
		})
	}
}

func TestCaseFactsValidate(t *testing.T) {
	_, loc := studyCalendar(t)
	flag := at(t, loc, "2026-04-02 10:00")
	tests := []struct {
		name   string
		facts  CaseFacts
		fields []string
	}{
		{"open case", CaseFacts{State: Open, FlaggedAt: flag}, nil},
		{"closed early needs no later steps", CaseFacts{State: ClosedWithdrawn, FlaggedAt: flag}, nil},
		{"unknown state and no flag", CaseFacts{State: "lost"}, []string{"flagged_at", "state"}},
		{"recording received without the steps before", CaseFacts{State: RecordingReceived, FlaggedAt: flag},
			[]string{"reached_at", "recorder_sent_at", "recording_received_at"}},
		{"steps out of order", CaseFacts{State: RecorderSent, FlaggedAt: flag, ReachedAt: at(t, loc, "2026-04-08 10:00"),
			RecorderSentAt: at(t, loc, "2026-04-07 10:00")}, []string{"recorder_sent_at"}},
		{"reached before the flag", CaseFacts{State: Reached, FlaggedAt: flag, ReachedAt: at(t, loc, "2026-04-01 10:00")}, []string{"reached_at"}},
		{"bad attempts", CaseFacts{State: Contacting, FlaggedAt: flag, Attempts: []Attempt{
			{Channel: ChannelPhone, Outcome: OutcomeNoAnswer},
			{At: flag, Channel: "pigeon", Outcome: OutcomeNoAnswer},
			{At: flag, Channel: ChannelPhone, Outcome: "maybe"},
		}}, []string{"attempts[0]", "attempts[1]", "attempts[2]"}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			err := tt.facts.Validate()
			if len(tt.fields) == 0 {
				if err != nil {
					t.Errorf("Validate() = %v", err)
				}
				return
			}
			var ve *cohort.ValidationError
			if !errors.As(err, &ve) {
				t.Fatalf("Validate() = %v, want a validation error", err)
			}
			var got []string
			for f := range ve.Fields {
				got = append(got, f)
			}
			if len(got) != len(tt.fields) {
				t.Errorf("fields %v, want %v", ve.Fields, tt.fields)
			}
			for _, f := range tt.fields {
				if ve.Fields[f] == "" {
					t.Errorf("no problem reported for %s (got %v)", f, ve.Fields)
				}
			}
		})
	}
}

func TestActionLabels(t *testing.T) {
	actions := []Action{ActionFirstContact, ActionNextAttempt, ActionSuggestUnreachable, ActionSendRecorder,
		ActionAwaitRecording, ActionChaseRecording, ActionOverRead, ActionReferOrClose}
	seen := map[string]bool{}
	for _, a := range actions {
		l := a.Label()
		if strings.HasPrefix(l, `"`) || seen[l] {
			t.Errorf("action %q has a missing or repeated label %q", a, l)
		}
		seen[l] = true
	}
	if len(seen) != len(actionLabels) {
		t.Errorf("%d labelled actions, %d tested", len(actionLabels), len(seen))
	}
}

// TestServiceLevelsCountWorkingDays: every deadline of the service levels
// counts working days, as the settings page says, so raising one from 3 to 5
// moves a due day by two working days, across a weekend (laid out by hand on
// studyCalendar: an event on Thursday 9 April 2026 is due, 3 working days
// later, on Tuesday 14th, and 5 working days later on Thursday 16th; counted
// in calendar days they would be Monday 13th and Tuesday 14th).
func TestServiceLevelsCountWorkingDays(t *testing.T) {
	cal, loc := studyCalendar(t)
	mustWeekday(t, "2026-04-09", time.Thursday)
	ev := at(t, loc, "2026-04-09 10:00")
	flag := at(t, loc, "2026-04-01 10:00")
	for _, lv := range []struct {
		name  string
		set   func(*ServiceLevels, int)
		facts CaseFacts
	}{
		{"first contact", func(s *ServiceLevels, n int) { s.FirstContactWorkingDays = n }, CaseFacts{State: Open, FlaggedAt: ev}},
		{"recorder sent", func(s *ServiceLevels, n int) { s.RecorderSendWithinDays = n }, CaseFacts{State: Reached, FlaggedAt: flag, ReachedAt: ev}},
		{"recording back", func(s *ServiceLevels, n int) { s.RecordingBackWithinDays = n }, CaseFacts{State: RecorderSent, FlaggedAt: flag, RecorderSentAt: ev}},
		{"over-read", func(s *ServiceLevels, n int) { s.OverReadWithinDays = n }, CaseFacts{State: RecordingReceived, FlaggedAt: flag, RecordingReceivedAt: ev}},
		{"refer or close", func(s *ServiceLevels, n int) { s.ReferOrCloseWithinDays = n }, CaseFacts{State: OverRead, FlaggedAt: flag, OverReadAt: ev}},
	} {
		for n, want := range map[int]string{3: "2026-04-14", 5: "2026-04-16"} {
			sl := DefaultServiceLevels()
			lv.set(&sl, n)
			_, due, ok := NextDue(lv.facts, sl, cal)
			if got := endOfDay(day(t, want), loc); !ok || !due.Equal(got) {
				t.Errorf("%s within %d: due %s, want the end of %s", lv.name, n, due.In(loc), want)
			}
		}
	}
}
