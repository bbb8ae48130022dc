package followup

import (
	"errors"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"
)

// fields returns the field messages of err, failing the test when err is
// neither nil nor the promised *cohort.ValidationError.
func fields(tb testing.TB, err error) map[string]string {
	tb.Helper()
	if err == nil {
		return nil
	}
	var ve *cohort.ValidationError
	if !errors.As(err, &ve) {
		tb.Fatalf("error %v (%T): want *cohort.ValidationError", err, err)
	}
	return ve.Fields
}

func TestAttemptEntryCheck(t *testing.T) {
	chicago, err := time.LoadLocation("America/Chicago")
	if err != nil {
		t.Fatal(err)
	}
	flagged := time.Date(2026, 6, 1, 14, 30, 20, 0, time.UTC) // 09:30 in Chicago (CDT, UTC-5; verified: GNU date)
	now := time.Date(2026, 6, 3, 12, 0, 0, 0, time.UTC)
	ok := AttemptEntry{Channel: ChannelPhone, Outcome: OutcomeNoAnswer}
	for _, c := range []struct {
		name string
		edit func(*AttemptEntry)
		want map[string]string
	}{
		{"now", func(*AttemptEntry) {}, nil},
		{"a time given", func(e *AttemptEntry) { e.At = now.Add(-time.Hour) }, nil},
		{"within the clock skew", func(e *AttemptEntry) { e.At = now.Add(AttemptSkew) }, nil},
		{"in the minute of the flag", func(e *AttemptEntry) { e.At = flagged.Truncate(time.Minute) }, nil},
		{"nothing chosen", func(e *AttemptEntry) { *e = AttemptEntry{} }, map[string]string{
			"channel": "choose how you tried to reach the participant", "outcome": "choose what came of the attempt"}},
		{"unknown values", func(e *AttemptEntry) { e.Channel, e.Outcome = "pigeon", "maybe" }, map[string]string{
			"channel": "choose how you tried to reach the participant", "outcome": "choose what came of the attempt"}},
		{"the desk's own outcome", func(e *AttemptEntry) { e.Outcome = OutcomeUndeliverable }, map[string]string{"outcome": "choose what came of the attempt"}},
		{"long note", func(e *AttemptEntry) { e.Note = strings.Repeat("x", 2001) }, map[string]string{"note": "use at most 2000 characters"}},
		{"future", func(e *AttemptEntry) { e.At = now.Add(AttemptSkew + time.Second) }, map[string]string{"at": "the attempt time is in the future"}},
		{"before the flag", func(e *AttemptEntry) { e.At = flagged.Add(-time.Minute) }, map[string]string{
			"at": "the attempt time is before the case was flagged (1 Jun 2026 09:30 CDT)"}},
	} {
		e := ok
		c.edit(&e)
		got := fields(t, e.Check(flagged, now, chicago))
		if len(got) != len(c.want) {
			t.Errorf("%s: %v, want %v", c.name, got, c.want)
		}
		for f, msg := range c.want {
			if got[f] != msg {
				t.Errorf("%s: %s: %q, want %q", c.name, f, got[f], msg)
			}
		}
	}
}

func TestLetter(t *testing.T) {
	for note, want := range map[string]string{"": "letter sent", "  second letter ": "letter sent; second letter"} {
		e := Letter(note)
		if e.Channel != ChannelLetter || e.Outcome != OutcomeMessageLeft || e.Note != want {
			t.Errorf("Letter(%q) = %+v, want note %q", note, e, want)
		}
		if !e.Outcome.Unanswered() {
			t.Error("a letter counts as answered")
		}
	}
	if got := (AttemptEntry{Channel: ChannelEmail}).ClosingNote(); got != "declined when contacted (e-mail)" {
		t.Errorf("closing note %q", got)
	}
}

func TestStepDays(t *testing.T) {
	tokyo, err := time.LoadLocation("Asia/Tokyo")
	if err != nil {
		t.Fatal(err)
	}
	// 2026-06-01 20:00 UTC is already 2 June in Tokyo (UTC+9, no daylight
	// saving; verified: GNU date).
	now := time.Date(2026, 6, 1, 20, 0, 0, 0, time.UTC)
	reached := time.Date(2026, 5, 30, 23, 0, 0, 0, time.UTC) // 31 May in Tokyo
	for _, c := range []struct {
		day      cohort.Date
		tracking string
		want     map[string]string
	}{
		{cohort.Date{Year: 2026, Month: 6, Day: 2}, "TRK1", nil},
		{cohort.Date{Year: 2026, Month: 5, Day: 31}, "", nil},
		{cohort.Date{Year: 2026, Month: 6, Day: 3}, "", map[string]string{"sent_on": "the date is in the future"}},
		{cohort.Date{Year: 2026, Month: 5, Day: 30}, "", map[string]string{"sent_on": "the date is before the participant was reached (31 May 2026)"}},
		{cohort.Date{Year: 2026, Month: 6, Day: 3}, strings.Repeat("9", 65), map[string]string{"tracking_number": "use at most 64 characters"}},
	} {
		got := fields(t, CheckShipment(c.day, c.tracking, reached, now, tokyo))
		if len(got) != len(c.want) || (c.want != nil && got[firstKey(c.want)] != c.want[firstKey(c.want)]) {
			t.Errorf("shipment on %s: %v, want %v", c.day, got, c.want)
		}
	}
	if got := fields(t, CheckReturn(cohort.Date{Year: 2026, Month: 5, Day: 30}, reached, now, tokyo)); got["back_on"] != "the date is before the recorder was sent (31 May 2026)" {
		t.Errorf("return before shipment: %v", got)
	}
	if got := fields(t, CheckReturn(cohort.Date{Year: 2026, Month: 6, Day: 2}, time.Time{}, now, tokyo)); got != nil {
		t.Errorf("return today: %v", got)
	}
	// Today the stored instant is now; another day is its noon in the zone.
	if got := StepTime(cohort.Date{Year: 2026, Month: 6, Day: 2}, now, tokyo); !got.Equal(now) {
		t.Errorf("today: %v, want now", got)
	}
	if got, want := StepTime(cohort.Date{Year: 2026, Month: 5, Day: 31}, now, tokyo), time.Date(2026, 5, 31, 3, 0, 0, 0, time.UTC); !got.Equal(want) {
		t.Errorf("an earlier day: %v, want %v (noon in Tokyo)", got, want)
	}
}

func firstKey(m map[string]string) string {
	for k := range m {
		return k
	}
	return ""
}

func TestCheckMove(t *testing.T) {
	for _, c := range []struct {
		from, to State
		reason   string
		closing  bool
		field    string
		contains string
	}{
		{Open, Contacting, "", false, "", ""},
		{Open, ClosedUnreachable, "no number on file", true, "", ""},
		{Open, OverRead, "", false, "state", "allowed next states: contacting, reached"},
		{Open, Contacting, "x", true, "state", "choose how the case ends: closed (unreachable), closed (declined), closed (withdrawn)"},
		{Open, ClosedUnreachable, "", true, "reason", "say why the case ends this way"},
		{OverRead, Referred, strings.Repeat("r", 1001), false, "reason", "use at most 1000 characters"},
		{Referred, ClosedWithdrawn, "x", true, "state", "allowed next states: none, referred is final"},
	} {
		got := fields(t, CheckMove(c.from, c.to, c.reason, c.closing))
		switch {
		case c.field == "" && got != nil:
			t.Errorf("%s -> %s: refused %v", c.from, c.to, got)
		case c.field != "" && !strings.Contains(got[c.field], c.contains):
			t.Errorf("%s -> %s: %v, want %s to say %q", c.from, c.to, got, c.field, c.contains)
		}
	}
}

func TestCheckNoteAndOwner(t *testing.T) {
	if fields(t, CheckNote(strings.Repeat("n", 500))) != nil || fields(t, CheckNote(strings.Repeat("n", 501)))["note"] == "" {
		t.Error("the note limit is not 500 characters")
	}
	for _, c := range []struct {
		active bool
		role   cohort.Role
		ok     bool
	}{
		{true, cohort.Coordinator, true}, {true, cohort.Investigator, true}, {true, cohort.Admin, true},
		{true, cohort.Monitor, false}, {false, cohort.Coordinator, false}, {false, "", false},
	} {
		if got := fields(t, CheckOwner(c.active, c.role)); (got == nil) != c.ok {
			t.Errorf("owner %s active %v: %v", c.role, c.active, got)
		}
	}
}
