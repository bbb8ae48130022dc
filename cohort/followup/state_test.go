package followup

import (
	"errors"
	"regexp"
	"slices"
	"strings"
	"testing"

	"cohortdesk/cohort"
)

// wantNext is the transition table written out a second time, as the
// specification the code must match (ours; see the stateTable comment for the
// reasons). Order matters: it is the order offered to users.
var wantNext = map[State][]State{
	Open:               {Contacting, Reached, ClosedUnreachable, ClosedDeclined, ClosedWithdrawn},
	Contacting:         {Reached, ClosedUnreachable, ClosedDeclined, ClosedWithdrawn},
	Reached:            {RecorderSent, ClosedDeclined, ClosedWithdrawn},
	RecorderSent:       {RecordingReceived, ClosedUnreachable, ClosedDeclined, ClosedWithdrawn},
	RecordingReceived:  {OverRead, RecorderSent, ClosedDeclined, ClosedWithdrawn},
	OverRead:           {Referred, ClosedNotConfirmed, ClosedWithdrawn, RecordingReceived}, // back when the reading is withdrawn
	Referred:           nil,
	ClosedNotConfirmed: nil,
	ClosedUnreachable:  nil,
	ClosedDeclined:     nil,
	ClosedWithdrawn:    nil,
}

var wantLabels = map[State]string{
	Open:               "open",
	Contacting:         "contacting",
	Reached:            "reached",
	RecorderSent:       "recorder sent",
	RecordingReceived:  "recording received",
	OverRead:           "over-read",
	Referred:           "referred",
	ClosedNotConfirmed: "closed (not confirmed)",
	ClosedUnreachable:  "closed (unreachable)",
	ClosedDeclined:     "closed (declined)",
	ClosedWithdrawn:    "closed (withdrawn)",
}

// moveMessage returns the field message of a refused move, failing the test
// when err is not the promised *cohort.ValidationError on "state".
func moveMessage(tb testing.TB, err error) string {
	tb.Helper()
	var ve *cohort.ValidationError
	if !errors.As(err, &ve) {
		tb.Fatalf("error %v (%T): want *cohort.ValidationError", err, err)
	}
	msg, ok := ve.Fields["state"]
	if !ok || len(ve.Fields) != 1 {
		tb.Fatalf("fields %v: want exactly the field \"state\"", ve.Fields)
	}
	return msg
}

func TestMoveAllPairs(t *testing.T) {
	if len(States()) != len(wantNext) {
		t.Fatalf("States() has %d states, the specification %d", len(States()), len(wantNext))
	}
	for _, from := range States() {
		want, known := wantNext[from]
		if !known {
			t.Fatalf("state %q missing from the specification", from)
		}
		labels := make([]string, len(want))
		for i, s := range want {
			labels[i] = wantLabels[s]
		}
		allowed := strings.Join(labels, ", ")
		if len(want) == 0 {
			allowed = "none, " + wantLabels[from] + " is final"
		}
		if got := Next(from); !slices.Equal(got, want) {
			t.Errorf("Next(%s) = %v, want %v", from, got, want)
		}
		for _, to := range States() {
			wantOK := slices.Contains(want, to)
			if got := CanMove(from, to); got != wantOK {
				t.Errorf("CanMove(%s, %s) = %v, want %v", from, to, got, wantOK)
			}
			err := Move(from, to)
			if wantOK {
				if err != nil {
					t.Errorf("Move(%s, %s) = %v, want nil", from, to, err)
				}
				continue
			}
			if err == nil {
				t.Errorf("Move(%s, %s) = nil, want a refusal", from, to)
				continue
			}
			got := moveMessage(t, err)
			wantMsg := "cannot move from " + wantLabels[from] + " to " + wantLabels[to] + "; allowed next states: " + allowed
			if got != wantMsg {
				t.Errorf("Move(%s, %s) message\n got %q\nwant %q", from, to, got, wantMsg)
			}
		}
	}
}

func TestMoveMessageExample(t *testing.T) {
	// The wording asked for in the brief for this package (ours).
	got := moveMessage(t, Move(Reached, OverRead))
	want := "cannot move from reached to over-read; allowed next states: recorder sent, closed (declined), closed (withdrawn)"
	if got != want {
		t.Errorf("got %q\nwant %q", got, want)
	}
	if !strings.HasPrefix(Move(Reached, OverRead).Error(), "invalid input: state: cannot move") {
		t.Errorf("Error() = %q", Move(Reached, OverRead).Error())
	}
}

func TestMoveUnknownStates(t *testing.T) {
	tests := []struct {
		name     string
		from, to State
		want     string
	}{
		{"unknown from", "lost", Open, `unknown current state "lost"`},
		{"unknown to", Open, "lost", `unknown state "lost"`},
		{"empty to", Open, "", `unknown state ""`},
		{"label instead of value", RecorderSent, "recording received", `unknown state "recording received"`},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			if got := moveMessage(t, Move(tt.from, tt.to)); got != tt.want {
				t.Errorf("got %q, want %q", got, tt.want)
			}
			if CanMove(tt.from, tt.to) {
				t.Error("CanMove = true, want false")
			}
		})
	}
	if Next("lost") != nil {
		t.Error("Next of an unknown state should be nil")
	}
}

func TestStateProperties(t *testing.T) {
	snake := regexp.MustCompile(`^[a-z]+(_[a-z]+)*$`)
	values, labels := map[string]bool{}, map[string]bool{}
	for _, s := range States() {
		if !snake.MatchString(string(s)) {
			t.Errorf("stored value %q is not snake_case", s)
		}
		if s.Label() != wantLabels[s] {
			t.Errorf("%s.Label() = %q, want %q", s, s.Label(), wantLabels[s])
		}
		if values[string(s)] || labels[s.Label()] {
			t.Errorf("state %q repeats a value or label", s)
		}
		values[string(s)], labels[s.Label()] = true, true
		if got, want := s.Terminal(), len(wantNext[s]) == 0; got != want {
			t.Errorf("%s.Terminal() = %v, want %v (final exactly when no moves)", s, got, want)
		}
		if !s.Terminal() && !CanMove(s, ClosedWithdrawn) {
			t.Errorf("%s cannot move to closed (withdrawn); consent can be withdrawn at any time", s)
		}
		if got, err := ParseState(" " + string(s) + " "); err != nil || got != s {
			t.Errorf("ParseState(%q) = %q, %v", s, got, err)
		}
	}
	if _, err := ParseState("Open"); err == nil {
		t.Error("ParseState accepts a value in the wrong case")
	}
	if got := State("lost").Label(); got != `"lost"` {
		t.Errorf("unknown label = %q", got)
	}
}

// TestLifeCycleGraph checks the table as a graph: every state can be reached
// from open, and every state being worked can still reach an end.
func TestLifeCycleGraph(t *testing.T) {
	reach := func(from State) map[State]bool {
		seen := map[State]bool{from: true}
		queue := []State{from}
		for len(queue) > 0 {
			s := queue[0]
			queue = queue[1:]
			for _, n := range Next(s) {
				if !seen[n] {
					seen[n] = true
					queue = append(queue, n)
				}
			}
		}
		return seen
	}
	fromOpen := reach(Open)
	for _, s := range States() {
		if !fromOpen[s] {
			t.Errorf("%s cannot be reached from open", s)
		}
		ends := 0
		for r := range reach(s) {
			if r.Terminal() {
				ends++
			}
		}
		if ends == 0 {
			t.Errorf("%s can never end", s)
		}
	}
	// The straight path of the domain notes is allowed step by step.
	path := []State{Open, Contacting, Reached, RecorderSent, RecordingReceived, OverRead, Referred}
	for i := 1; i < len(path); i++ {
		if err := Move(path[i-1], path[i]); err != nil {
			t.Errorf("straight path step %d: %v", i, err)
		}
	}
}

func TestNextReturnsCopy(t *testing.T) {
	n := Next(Open)
	n[0] = Referred
	if Next(Open)[0] != Contacting {
		t.Error("changing the slice from Next changed the table")
	}
}

func FuzzParseState(f *testing.F) {
	for _, s := range States() {
		f.Add(string(s))
	}
	f.Add("recording received")
	f.Add("")
	f.Add(" over_read\t")
	f.Fuzz(func(t *testing.T, in string) {
		s, err := ParseState(in)
		if err != nil {
			if s != "" {
				t.Fatalf("error %v with non-empty state %q", err, s)
			}
			return
		}
		if !s.Valid() || s != State(strings.TrimSpace(in)) {
			t.Fatalf("ParseState(%q) = %q", in, s)
		}
		if again, err := ParseState(string(s)); err != nil || again != s {
			t.Fatalf("round trip of %q: %q, %v", s, again, err)
		}
	})
}
