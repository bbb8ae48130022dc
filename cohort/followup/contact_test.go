package followup

import (
	"regexp"
	"slices"
	"testing"
)

func TestAfterAttempt(t *testing.T) {
	type want struct {
		next State
		move bool
	}
	// Expected effects written out per outcome and state (ours, from the rules
	// in the brief: reached moves open/contacting to reached; declined closes as
	// declined; the first attempt moves open to contacting).
	tests := []struct {
		state State
		want  map[Outcome]want
	}{
		{Open, map[Outcome]want{
			OutcomeReached: {Reached, true}, OutcomeNoAnswer: {Contacting, true}, OutcomeMessageLeft: {Contacting, true},
			OutcomeWrongNumber: {Contacting, true}, OutcomeDeclined: {ClosedDeclined, true}}},
		{Contacting, map[Outcome]want{
			OutcomeReached: {Reached, true}, OutcomeNoAnswer: {Contacting, false}, OutcomeMessageLeft: {Contacting, false},
			OutcomeWrongNumber: {Contacting, false}, OutcomeDeclined: {ClosedDeclined, true}}},
		{Reached, map[Outcome]want{
			OutcomeReached: {Reached, false}, OutcomeNoAnswer: {Reached, false}, OutcomeMessageLeft: {Reached, false},
			OutcomeWrongNumber: {Reached, false}, OutcomeDeclined: {ClosedDeclined, true}}},
		{RecorderSent, map[Outcome]want{
			OutcomeReached: {RecorderSent, false}, OutcomeNoAnswer: {RecorderSent, false}, OutcomeMessageLeft: {RecorderSent, false},
			OutcomeWrongNumber: {RecorderSent, false}, OutcomeDeclined: {ClosedDeclined, true}}},
		{RecordingReceived, map[Outcome]want{
			OutcomeReached: {RecordingReceived, false}, OutcomeNoAnswer: {RecordingReceived, false}, OutcomeMessageLeft: {RecordingReceived, false},
			OutcomeWrongNumber: {RecordingReceived, false}, OutcomeDeclined: {ClosedDeclined, true}}},
		{OverRead, map[Outcome]want{
			OutcomeReached: {OverRead, false}, OutcomeNoAnswer: {OverRead, false}, OutcomeMessageLeft: {OverRead, false},
			OutcomeWrongNumber: {OverRead, false}, OutcomeDeclined: {OverRead, false}}},
	}
	covered := map[State]bool{}
	for _, tt := range tests {
		covered[tt.state] = true
		for _, o := range Outcomes() {
			w, ok := tt.want[o]
			if !ok {
				t.Fatalf("table misses %s/%s", tt.state, o)
			}
			next, move, err := AfterAttempt(tt.state, o)
			if err != nil || next != w.next || move != w.move {
				t.Errorf("AfterAttempt(%s, %s) = %s, %v, %v; want %s, %v", tt.state, o, next, move, err, w.next, w.move)
			}
			if move {
				if err := Move(tt.state, next); err != nil {
					t.Errorf("AfterAttempt(%s, %s) suggests a move the table refuses: %v", tt.state, o, err)
				}
			}
		}
	}
	// Final states: an attempt is logged but moves nothing.
	for _, s := range States() {
		if covered[s] {
			continue
		}
		if !s.Terminal() {
			t.Errorf("state %s missing from the table", s)
		}
		for _, o := range Outcomes() {
			if next, move, err := AfterAttempt(s, o); err != nil || move || next != s {
				t.Errorf("AfterAttempt(%s, %s) = %s, %v, %v; want no move", s, o, next, move, err)
			}
		}
	}
}

func TestAfterAttemptErrors(t *testing.T) {
	if _, _, err := AfterAttempt("lost", OutcomeReached); err == nil {
		t.Error("unknown state accepted")
	}
	if _, _, err := AfterAttempt(Open, "busy"); err == nil {
		t.Error("unknown outcome accepted")
	}
}

func TestChannelsAndOutcomes(t *testing.T) {
	snake := regexp.MustCompile(`^[a-z]+(_[a-z]+)*$`)
	wantChannels := map[Channel]string{ChannelPhone: "phone", ChannelEmail: "e-mail", ChannelText: "text message", ChannelLetter: "letter"}
	if len(Channels()) != len(wantChannels) {
		t.Errorf("%d channels, want %d", len(Channels()), len(wantChannels))
	}
	for _, c := range Channels() {
		if !snake.MatchString(string(c)) || c.Label() != wantChannels[c] {
			t.Errorf("channel %q label %q", c, c.Label())
		}
		if got, err := ParseChannel(string(c)); err != nil || got != c {
			t.Errorf("ParseChannel(%q) = %q, %v", c, got, err)
		}
	}
	wantOutcomes := map[Outcome]struct {
		label      string
		unanswered bool
	}{
		OutcomeReached:     {"reached", false},
		OutcomeNoAnswer:    {"no answer", true},
		OutcomeMessageLeft: {"message left", true},
		OutcomeWrongNumber: {"wrong number or address", true},
		OutcomeDeclined:    {"declined", false},
	}
	if len(Outcomes()) != len(wantOutcomes) {
		t.Errorf("%d outcomes, want %d", len(Outcomes()), len(wantOutcomes))
	}
	for _, o := range Outcomes() {
		w := wantOutcomes[o]
		if !snake.MatchString(string(o)) || o.Label() != w.label || o.Unanswered() != w.unanswered {
			t.Errorf("outcome %q: label %q unanswered %v", o, o.Label(), o.Unanswered())
		}
		if got, err := ParseOutcome(string(o)); err != nil || got != o {
			t.Errorf("ParseOutcome(%q) = %q, %v", o, got, err)
		}
	}
	// The desk's own outcome: valid, stored, never offered on a form, not
	// counted as unanswered.
	if u := OutcomeUndeliverable; !u.Valid() || u.Unanswered() || u.Label() != "not delivered" || slices.Contains(Outcomes(), u) {
		t.Errorf("undeliverable: valid %v unanswered %v label %q", u.Valid(), u.Unanswered(), u.Label())
	}
	if _, err := ParseChannel("fax"); err == nil {
		t.Error("ParseChannel accepts fax")
	}
	if _, err := ParseOutcome("no answer"); err == nil {
		t.Error("ParseOutcome accepts a label")
	}
	if Channel("fax").Label() != `"fax"` || Outcome("x").Label() != `"x"` {
		t.Error("unknown values should show quoted")
	}
}

func FuzzParseOutcome(f *testing.F) {
	for _, o := range Outcomes() {
		f.Add(string(o))
	}
	for _, c := range Channels() {
		f.Add(string(c))
	}
	f.Add("")
	f.Fuzz(func(t *testing.T, in string) {
		if o, err := ParseOutcome(in); err == nil && !o.Valid() {
			t.Fatalf("ParseOutcome(%q) = invalid %q", in, o)
		}
		if c, err := ParseChannel(in); err == nil && !c.Valid() {
			t.Fatalf("ParseChannel(%q) = invalid %q", in, c)
		}
	})
}
