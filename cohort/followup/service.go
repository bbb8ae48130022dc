package followup

import (
	"fmt"
	"slices"
	"time"

	"cohortdesk/cohort"
)

// ServiceLevels are a study's promises on how fast each step happens. They are
// study settings; the defaults are illustrative.
//
// Units: every deadline ("...WithinDays" and FirstContactWorkingDays) counts
// working days of the study's calendar from the event's day (AddWorkingDays),
// since a person on staff must act on it: 5 means the end of the fifth
// working day after the event. GiveUpAfterDays alone is a span of calendar
// days, over which unanswered attempts are spread.
type ServiceLevels struct {
	FirstContactWorkingDays int // flag -> first contact attempt
	MaxAttempts             int // unanswered attempts before closing as unreachable is suggested ...
	GiveUpAfterDays         int // ... provided they span at least this many days
	RecorderSendWithinDays  int // participant reached -> recorder shipped, working days
	RecordingBackWithinDays int // recorder shipped -> recording back, working days; after it staff chase the recording
	OverReadWithinDays      int // recording received -> interpretable over-read, working days
	ReferOrCloseWithinDays  int // over-read -> referral sent or case closed, working days
}

// maxSettingDays bounds every day setting; a year is far beyond any sensible
// value, so a larger one is a typing slip (1400 for 14).
const maxSettingDays = 366

// DefaultServiceLevels are illustrative defaults of ours, not taken from any
// guideline: 2 working days to a first attempt and 5 days to ship a recorder
// follow the examples in the domain notes; 5 unanswered attempts over at least
// 14 days, 14 days for the recording to come back, 7 days for an over-read
// and 3 days from over-read to referral or closing are our guesses at
// workable values. Each study should set its own.
func DefaultServiceLevels() ServiceLevels {
	return ServiceLevels{
		FirstContactWorkingDays: 2,
		MaxAttempts:             5,
		GiveUpAfterDays:         14,
		RecorderSendWithinDays:  5,
		RecordingBackWithinDays: 14,
		OverReadWithinDays:      7,
		ReferOrCloseWithinDays:  3,
	}
}

// Validate checks the settings; field names match the settings form.
func (s ServiceLevels) Validate() error {
	var ve cohort.ValidationError
	days := func(field string, v int) {
		if v < 0 || v > maxSettingDays {
			ve.Add(field, fmt.Sprintf("%d: want 0 to %d days", v, maxSettingDays))
		}
	}
	days("first_contact_working_days", s.FirstContactWorkingDays)
	if s.MaxAttempts < 1 || s.MaxAttempts > 100 {
		ve.Add("max_attempts", fmt.Sprintf("%d: want 1 to 100 attempts", s.MaxAttempts))
	}
	days("give_up_after_days", s.GiveUpAfterDays)
	days("recorder_send_within_days", s.RecorderSendWithinDays)
	days("recording_back_within_days", s.RecordingBackWithinDays)
	days("over_read_within_days", s.OverReadWithinDays)
	days("refer_or_close_within_days", s.ReferOrCloseWithinDays)
	return ve.Err()
}

// Action is the next thing to do on a case. Values are stable for storage
// and tests; labels are for the page.
type Action string

// The next actions NextDue can name.
const (
	ActionFirstContact       Action = "first_contact"
	ActionNextAttempt        Action = "next_attempt"
	ActionSuggestUnreachable Action = "suggest_unreachable"
	ActionSendRecorder       Action = "send_recorder"
	ActionAwaitRecording     Action = "await_recording"
	ActionChaseRecording     Action = "chase_recording"
	ActionOverRead           Action = "over_read"
	ActionReferOrClose       Action = "refer_or_close"
)

var actionLabels = cohort.Words[Action]{
	ActionFirstContact:       "make the first contact attempt",
	ActionNextAttempt:        "try to reach the participant again",
	ActionSuggestUnreachable: "consider closing as unreachable",
	ActionSendRecorder:       "send the recorder",
	ActionAwaitRecording:     "recording due back",
	ActionChaseRecording:     "chase the recording",
	ActionOverRead:           "over-read the recording",
	ActionReferOrClose:       "refer or close",
}

// Label is the wording shown on pages; unknown values are shown quoted.
func (a Action) Label() string { return actionLabels.Label(a) }

// CaseFacts are the recorded facts NextDue works from. Zero times are unset.
type CaseFacts struct {
	State               State
	FlaggedAt           time.Time
	Attempts            []Attempt // any order
	ReachedAt           time.Time
	RecorderSentAt      time.Time
	RecordingReceivedAt time.Time
	OverReadAt          time.Time // when the interpretable over-read was entered
}

// Validate reports facts that contradict the state: a known state, a flag
// time, the time of every step the state implies (for cases still being
// worked), steps in order, and attempts with a time, channel and outcome.
func (c CaseFacts) Validate() error {
	var ve cohort.ValidationError
	if !c.State.Valid() {
		ve.Add("state", fmt.Sprintf("unknown state %q", string(c.State)))
	}
	if c.FlaggedAt.IsZero() {
		ve.Add("flagged_at", "missing")
	}
	steps := []struct {
		field string
		at    time.Time
		from  State // states from which the step must be recorded
	}{
		{"reached_at", c.ReachedAt, Reached},
		{"recorder_sent_at", c.RecorderSentAt, RecorderSent},
		{"recording_received_at", c.RecordingReceivedAt, RecordingReceived},
		{"over_read_at", c.OverReadAt, OverRead},
	}
	rank := slices.Index(allStates, c.State)
	prev, prevField := c.FlaggedAt, "flagged_at"
	for _, s := range steps {
		if s.at.IsZero() {
			if !c.State.Terminal() && rank >= slices.Index(allStates, s.from) {
				ve.Add(s.field, "missing for a case in state "+c.State.Label())
			}
			continue
		}
		if !prev.IsZero() && s.at.Before(prev) {
			ve.Add(s.field, "earlier than "+prevField)
		}
		prev, prevField = s.at, s.field
	}
	for i, a := range c.Attempts {
		f := fmt.Sprintf("attempts[%d]", i)
		switch {
		case a.At.IsZero():
			ve.Add(f, "missing time")
		case !a.Channel.Valid():
			ve.Add(f, fmt.Sprintf("unknown channel %q", string(a.Channel)))
		case !a.Outcome.Valid():
			ve.Add(f, fmt.Sprintf("unknown outcome %q", string(a.Outcome)))
		}
	}
	return ve.Err()
}

// NextDue names the next action on a case and when it is due (see
// Calendar.AddWorkingDays for the meaning of the instant). ok is false for
// final cases and unknown states: nothing is due.
//
// Per state:
//   - open: first contact attempt, FirstContactWorkingDays after the flag.
//   - contacting: another attempt, paced (below); once the unanswered attempts
//     number at least MaxAttempts and the first and last of them lie at least
//     GiveUpAfterDays calendar days apart, the action becomes "consider closing
//     as unreachable", due by the end of the last attempt's day.
//   - reached: send the recorder, RecorderSendWithinDays after reaching.
//   - recorder sent: the recording is due back RecordingBackWithinDays after
//     shipping; once staff start chasing it, chase attempts are paced and can
//     lead to the unreachable suggestion the same way. A conversation with the
//     participant restarts the count of unanswered attempts, and the next
//     chase is then due one attempt interval after it (but not before the
//     recording's own due day).
//   - recording received: over-read, OverReadWithinDays after receipt.
//   - over-read: refer or close, ReferOrCloseWithinDays after the over-read.
//
// Pacing (ours): the attempts of a round are spread evenly over the give-up
// window, so the k-th attempt (k = 0 for the first) is due
// ceil(min(k, M-1) * D / (M-1)) calendar days after the first attempt's day
// (D days when M = 1), and never before the working day after the previous
// attempt. Attempts made on schedule therefore meet both limits with the
// MaxAttempts-th attempt; with MaxAttempts 1 and a window, a second attempt at
// the window's end is needed, since one attempt spans no days. Attempts logged
// before the flag (or, when chasing, before the recorder was sent) do not
// count.
//
// Missing facts never hide a case: when the time a rule needs is unset, the
// nearest earlier recorded step stands in for it, which makes the case come
// due sooner rather than vanish from the triage list. CaseFacts.Validate
// reports the gap.
func NextDue(c CaseFacts, sl ServiceLevels, cal Calendar) (action Action, due time.Time, ok bool) {
	if !c.State.Valid() || c.State.Terminal() {
		return "", time.Time{}, false
	}
	attempts := slices.Clone(c.Attempts)
	slices.SortStableFunc(attempts, func(a, b Attempt) int { return a.At.Compare(b.At) })

	switch c.State {
	case Open:
		return ActionFirstContact, cal.AddWorkingDays(c.FlaggedAt, sl.FirstContactWorkingDays), true

	case Contacting:
		rd, _ := unansweredRound(attempts, c.FlaggedAt)
		if len(rd) == 0 {
			if len(attempts) == 0 {
				return ActionFirstContact, cal.AddWorkingDays(c.FlaggedAt, sl.FirstContactWorkingDays), true
			}
			return ActionNextAttempt, cal.AddWorkingDays(attempts[len(attempts)-1].At, 1), true
		}
		if giveUp(rd, sl, cal) {
			return ActionSuggestUnreachable, cal.AddWorkingDays(rd[len(rd)-1].At, 0), true
		}
		return ActionNextAttempt, paceDue(rd, sl, cal), true

	case Reached:
		base := firstSet(c.ReachedAt, lastReached(attempts), c.FlaggedAt)
		return ActionSendRecorder, cal.AddWorkingDays(base, sl.RecorderSendWithinDays), true

	case RecorderSent:
		sent := firstSet(c.RecorderSentAt, c.ReachedAt, c.FlaggedAt)
		back := cal.AddWorkingDays(sent, sl.RecordingBackWithinDays)
		rd, talked := unansweredRound(attempts, sent)
		if len(rd) == 0 {
			if !talked.IsZero() {
				return ActionAwaitRecording, later(back, cal.afterDays(talked, attemptInterval(sl))), true
			}
			return ActionAwaitRecording, back, true
		}
		if giveUp(rd, sl, cal) {
			return ActionSuggestUnreachable, cal.AddWorkingDays(rd[len(rd)-1].At, 0), true
		}
		return ActionChaseRecording, paceDue(rd, sl, cal), true

	case RecordingReceived:
		base := firstSet(c.RecordingReceivedAt, c.RecorderSentAt, c.ReachedAt, c.FlaggedAt)
		return ActionOverRead, cal.AddWorkingDays(base, sl.OverReadWithinDays), true

	case OverRead:
		base := firstSet(c.OverReadAt, c.RecordingReceivedAt, c.RecorderSentAt, c.ReachedAt, c.FlaggedAt)
		return ActionReferOrClose, cal.AddWorkingDays(base, sl.ReferOrCloseWithinDays), true
	}
	return "", time.Time{}, false
}

// unansweredRound returns the unanswered attempts at or after since that
// followed the last conversation with the participant, and the time of that
// conversation (zero when none happened since since). attempts must be sorted.
func unansweredRound(attempts []Attempt, since time.Time) (round []Attempt, talked time.Time) {
	for _, a := range attempts {
		if a.At.Before(since) {
			continue
		}
		switch {
		case a.Outcome == OutcomeReached:
			round, talked = nil, a.At
		case a.Outcome.Unanswered():
			round = append(round, a)
		}
	}
	return round, talked
}

// giveUp applies the unreachable rule to a round of unanswered attempts.
func giveUp(round []Attempt, sl ServiceLevels, cal Calendar) bool {
	first, last := cal.DateOf(round[0].At), cal.DateOf(round[len(round)-1].At)
	return len(round) >= sl.MaxAttempts && last.DaysSince(first) >= sl.GiveUpAfterDays
}

// paceDue is the due time of the next attempt of a round (see NextDue).
func paceDue(round []Attempt, sl ServiceLevels, cal Calendar) time.Time {
	k := len(round)
	var offset int
	if sl.MaxAttempts <= 1 {
		offset = sl.GiveUpAfterDays
	} else {
		steps := sl.MaxAttempts - 1
		offset = ceilDiv(min(k, steps)*sl.GiveUpAfterDays, steps)
	}
	planned := cal.afterDays(round[0].At, offset)
	return later(planned, cal.AddWorkingDays(round[len(round)-1].At, 1))
}

// attemptInterval is the calendar-day spacing between paced attempts, at least 1.
func attemptInterval(sl ServiceLevels) int {
	if sl.MaxAttempts <= 1 {
		return max(sl.GiveUpAfterDays, 1)
	}
	return max(ceilDiv(sl.GiveUpAfterDays, sl.MaxAttempts-1), 1)
}

func ceilDiv(a, b int) int { return (a + b - 1) / b }

func lastReached(attempts []Attempt) time.Time {
	for i := len(attempts) - 1; i >= 0; i-- {
		if attempts[i].Outcome == OutcomeReached {
			return attempts[i].At
		}
	}
	return time.Time{}
}

func firstSet(ts ...time.Time) time.Time {
	for _, t := range ts {
		if !t.IsZero() {
			return t
		}
	}
	return time.Time{}
}

func later(a, b time.Time) time.Time {
	if b.After(a) {
		return b
	}
	return a
}
