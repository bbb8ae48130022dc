package followup

import (
	"fmt"
	"strings"

	"cohortdesk/cohort"
)

// State is where a follow-up case stands. The string value is what the store
// keeps and what forms submit, so a value never changes once released; the
// label is for people and may be reworded freely.
type State string

// The case states, in the order a case normally passes through them, then the
// five ways a case ends.
const (
	Open               State = "open"                 // flagged, nobody has tried to reach the participant yet
	Contacting         State = "contacting"           // at least one attempt made, participant not yet reached
	Reached            State = "reached"              // participant spoken to and agreed to record
	RecorderSent       State = "recorder_sent"        // handheld recorder shipped, recording awaited
	RecordingReceived  State = "recording_received"   // recording in, waiting for a usable over-read
	OverRead           State = "over_read"            // a clinician has given an interpretable verdict
	Referred           State = "referred"             // final: summary sent to the participant's physician
	ClosedNotConfirmed State = "closed_not_confirmed" // final: the over-read did not confirm AF
	ClosedUnreachable  State = "closed_unreachable"   // final: the participant could not be reached
	ClosedDeclined     State = "closed_declined"      // final: the participant declined follow-up
	ClosedWithdrawn    State = "closed_withdrawn"     // final: the participant left the study
)

// stateInfo is one row of the state table. Keeping label, finality and the
// allowed moves together makes the whole life cycle readable in one place.
type stateInfo struct {
	label    string
	terminal bool
	next     []State // allowed moves, in the order they are offered to the user
}

// allStates lists every state in display order; the table below must cover
// each of them (a test checks it).
var allStates = []State{
	Open, Contacting, Reached, RecorderSent, RecordingReceived, OverRead,
	Referred, ClosedNotConfirmed, ClosedUnreachable, ClosedDeclined, ClosedWithdrawn,
}

// stateTable is the transition table. Decisions beyond the straight path:
//
//   - Open may jump to Reached or ClosedDeclined because the very first attempt
//     can reach the participant or meet a refusal; forcing a stop at Contacting
//     would log a state the case never really was in.
//   - ClosedUnreachable is allowed from Open (no usable contact details on
//     file), Contacting, and RecorderSent (the recorder went out and the
//     participant then fell silent: lost to follow-up). It is not offered from
//     Reached, because the next step there, shipping the recorder, needs no
//     answer from the participant.
//   - ClosedDeclined is allowed up to and including RecordingReceived (the
//     participant may refuse a repeat recording). After the over-read nothing
//     more is asked of the participant; leaving then is a withdrawal.
//   - RecordingReceived may go back to RecorderSent: when a recording is
//     unusable (too short, empty file, or an over-reader's "uninterpretable"
//     verdict) a repeat recording is requested. An uninterpretable verdict is
//     stored with the recording but does not move the case to OverRead; OverRead
//     means an interpretable verdict exists, which is what the PPV counts.
//   - OverRead may go back to RecordingReceived when its reader withdraws or
//     amends the reading that made it, and no recording of the case has a
//     settled interpretable over-read any more (the system's move; nobody
//     makes it by hand, see HandMoves).
//   - Every non-final state may go to ClosedWithdrawn: consent can be withdrawn
//     at any time.
//   - Final states have no moves. A later positive week opens a new case
//     (see AssignToCases) rather than reopening an old one, so each case keeps
//     one outcome for reporting.
var stateTable = map[State]stateInfo{
	Open:               {"open", false, []State{Contacting, Reached, ClosedUnreachable, ClosedDeclined, ClosedWithdrawn}},
	Contacting:         {"contacting", false, []State{Reached, ClosedUnreachable, ClosedDeclined, ClosedWithdrawn}},
	Reached:            {"reached", false, []State{RecorderSent, ClosedDeclined, ClosedWithdrawn}},
	RecorderSent:       {"recorder sent", false, []State{RecordingReceived, ClosedUnreachable, ClosedDeclined, ClosedWithdrawn}},
	RecordingReceived:  {"recording received", false, []State{OverRead, RecorderSent, ClosedDeclined, ClosedWithdrawn}},
	OverRead:           {"over-read", false, []State{Referred, ClosedNotConfirmed, ClosedWithdrawn, RecordingReceived}},
	Referred:           {"referred", true, nil},
	ClosedNotConfirmed: {"closed (not confirmed)", true, nil},
	ClosedUnreachable:  {"closed (unreachable)", true, nil},
	ClosedDeclined:     {"closed (declined)", true, nil},
	ClosedWithdrawn:    {"closed (withdrawn)", true, nil},
}

// States returns every state in display order, for filters and legends.
func States() []State { return append([]State(nil), allStates...) }

// ParseState reads a stored or submitted state value. Only the stored value is
// accepted, not the label, so reworded labels never break stored data.
func ParseState(s string) (State, error) {
	st := State(strings.TrimSpace(s))
	if !st.Valid() {
		return "", fmt.Errorf("followup: unknown case state %q", s)
	}
	return st, nil
}

// Valid reports whether s is one of the defined states.
func (s State) Valid() bool {
	_, ok := stateTable[s]
	return ok
}

// Label is the wording shown on pages. Unknown values are shown quoted so a
// bad stored value is visible instead of blank.
func (s State) Label() string {
	if info, ok := stateTable[s]; ok {
		return info.label
	}
	return fmt.Sprintf("%q", string(s))
}

// Terminal reports whether the case has ended in s; final cases leave the
// working lists and count once in the reports.
func (s State) Terminal() bool { return stateTable[s].terminal }

// CanMove reports whether the table allows a case in from to move to to.
func CanMove(from, to State) bool {
	for _, n := range stateTable[from].next {
		if n == to {
			return true
		}
	}
	return false
}

// Next lists the states a case in from may move to, in the order to offer
// them; nil for final or unknown states. The slice is a copy.
func Next(from State) []State {
	n := stateTable[from].next
	if len(n) == 0 {
		return nil
	}
	return append([]State(nil), n...)
}

// Move checks a requested move. A refused move is a *cohort.ValidationError on
// the field "state" whose message names the allowed next states, so the form
// can show the user what they can do instead of only what they cannot.
func Move(from, to State) error {
	var ve cohort.ValidationError
	switch {
	case !from.Valid():
		ve.Add("state", fmt.Sprintf("unknown current state %q", string(from)))
	case !to.Valid():
		ve.Add("state", fmt.Sprintf("unknown state %q", string(to)))
	case !CanMove(from, to):
		ve.Add("state", fmt.Sprintf("cannot move from %s to %s; allowed next states: %s",
			from.Label(), to.Label(), allowedList(from)))
	}
	return ve.Err()
}

// allowedList words the allowed moves of from for a message.
func allowedList(from State) string {
	next := stateTable[from].next
	if len(next) == 0 {
		return "none, " + from.Label() + " is final"
	}
	labels := make([]string, len(next))
	for i, n := range next {
		labels[i] = n.Label()
	}
	return strings.Join(labels, ", ")
}
