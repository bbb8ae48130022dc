package followup

import (
	"fmt"
	"slices"

	"cohortdesk/cohort"
)

// Step is one thing a person does to a case. The case page has a form for
// every step its case offers; a triage row has one-step forms for the quick
// ones. The values are stable: pages and tests name steps by them.
type Step string

// The steps of working a case.
const (
	StepAssign    Step = "assign"    // give the case to someone, or take it on
	StepAttempt   Step = "attempt"   // log an attempt to reach the participant
	StepMessage   Step = "message"   // send a message from the desk: e-mail, text message or printed letter
	StepShipment  Step = "shipment"  // record the recorder's shipment (or correct it while it is out)
	StepReturn    Step = "return"    // record the day the recording came back
	StepRecording Step = "recording" // add an ECG recording to the case
	StepMove      Step = "move"      // move the case to another working state
	StepClose     Step = "close"     // end the case, with the reason
	StepNote      Step = "note"      // change the short working note
	StepOverRead  Step = "over_read" // read a recording of the case (on the recording's page)
	StepSignOff   Step = "sign_off"  // sign the case's referral summary off, which refers the case
)

// WorksCases is the rule for who works cases: who may own one, take it on,
// move or close it and keep its note. They are the roles that see the
// participant's contact details.
func WorksCases(r cohort.Role) bool {
	return r == cohort.Coordinator || r == cohort.Investigator || r == cohort.Admin
}

// ReachesParticipants is the rule for who contacts participants and handles
// the recorders: attempts, shipments, returns and recordings. Investigators
// work cases but leave this to the coordinators.
func ReachesParticipants(r cohort.Role) bool {
	return r == cohort.Coordinator || r == cohort.Admin
}

// Clinical is the rule for the clinicians' steps: reading recordings and
// signing referral summaries off are the investigators'.
func Clinical(r cohort.Role) bool { return r == cohort.Investigator }

// CaseWorkerRoles lists the roles WorksCases admits, for a query that picks
// the people a case may be given to.
func CaseWorkerRoles() []cohort.Role {
	var out []cohort.Role
	for _, r := range cohort.Roles {
		if WorksCases(r) {
			out = append(out, r)
		}
	}
	return out
}

// stepRule is one row of the step table: who may take the step, in which
// states a case offers it, and in which of those a triage row offers it in
// one click because it is the step the case waits for.
type stepRule struct {
	step  Step
	who   func(cohort.Role) bool
	in    func(State) bool
	quick func(State) bool
}

func working(st State) bool { return st.Valid() && !st.Terminal() }

func oneOf(states ...State) func(State) bool {
	return func(st State) bool { return slices.Contains(states, st) }
}

func never(State) bool { return false }

// hasNext reports whether some move of st a person may make by hand
// (HandMoves) leads to a final state (final true) or to a working state
// (final false).
func hasNext(final bool) func(State) bool {
	return func(st State) bool {
		return slices.ContainsFunc(HandMoves(st), func(n State) bool { return n.Terminal() == final })
	}
}

// stepReaches are the states a step of its own moves a case to. Such a state
// is reached through its step only, never by a plain move or closing: the
// shipment's date and tracking number, the return's date and the referral
// summary's sign-off are what the state stands for.
var stepReaches = map[State]struct {
	step Step
	how  string
}{
	RecorderSent:      {StepShipment, "record the recorder's shipment"},
	RecordingReceived: {StepReturn, "record the recording's return (adding the recording does it too)"},
	Referred:          {StepSignOff, "an investigator signs the case's referral summary off"},
}

// HandMoves lists the states a person may move or close a case in state from
// to by hand, in the order to offer them: the state table's moves (Next)
// without the states a step of their own reaches.
func HandMoves(from State) []State {
	var out []State
	for _, n := range Next(from) {
		if _, ok := stepReaches[n]; !ok {
			out = append(out, n)
		}
	}
	return out
}

// CheckHandMove checks a move or closing made by hand: CheckMove's rules,
// and a state with a step of its own is refused with the way to reach it.
func CheckHandMove(from, to State, reason string, closing bool) error {
	if r, ok := stepReaches[to]; ok && from.Valid() && !from.Terminal() {
		return &cohort.ValidationError{Fields: map[string]string{"state": fmt.Sprintf("a case becomes %s only one way: %s", to.Label(), r.how)}}
	}
	return CheckMove(from, to, reason, closing)
}

// stepTable is the one answer to "which steps does a case in this state
// offer, to whom", in the order the case page shows them. Final cases offer
// nothing: a later positive week opens a new case instead.
//
//   - A contact attempt can be logged in every working state (a reminder
//     call after the recorder went out, news passed on after the over-read);
//     the triage row offers it where reaching the participant is what the
//     case waits for: open, contacting, and a recorder out whose recording
//     is chased like a contact.
//   - A message from the desk is a contact attempt made by the desk, so it
//     follows the attempt's rule: every working state, one click on the
//     triage row where reaching the participant is what the case waits for.
//   - The shipment is recorded once the participant is reached, may be
//     corrected (date, tracking number) while the recorder is out, and is
//     recorded again when a returned recording was unusable and a repeat is
//     sent (the state table's way back from "recording received").
//   - A recording can be added once the recorder went out and until the case
//     ends: a repeat recording may follow an unusable one or an over-read.
//   - Moves and closings by hand offer only the states no step of their own
//     reaches (HandMoves): "recorder sent", "recording received" and
//     "referred" come from the shipment, the return and the sign-off.
//   - Investigators read a case's recordings once the recorder went out (a
//     second reading may follow the case's over-read); the triage row offers
//     it where the case waits for it. They sign a referral summary off once
//     the case is over-read (web/referrals.go; the summary must report AF).
var stepTable = []stepRule{
	{StepAssign, WorksCases, working, working},
	{StepAttempt, ReachesParticipants, working, oneOf(Open, Contacting, RecorderSent)},
	{StepMessage, ReachesParticipants, working, oneOf(Open, Contacting, RecorderSent)},
	{StepShipment, ReachesParticipants, oneOf(Reached, RecorderSent, RecordingReceived), oneOf(Reached)},
	{StepReturn, ReachesParticipants, oneOf(RecorderSent), never},
	{StepRecording, ReachesParticipants, oneOf(RecorderSent, RecordingReceived, OverRead), never},
	{StepMove, WorksCases, hasNext(false), never},
	{StepClose, WorksCases, hasNext(true), never},
	{StepNote, WorksCases, working, never},
	{StepOverRead, Clinical, oneOf(RecorderSent, RecordingReceived, OverRead), oneOf(RecordingReceived)},
	{StepSignOff, Clinical, oneOf(OverRead), never},
}

// Offers lists the steps a case in state st offers to a person in role r,
// in the order the case page shows them; nil for a final or unknown state or
// a role that works no cases.
func Offers(st State, r cohort.Role) []Step {
	var out []Step
	for _, s := range stepTable {
		if working(st) && s.in(st) && s.who(r) {
			out = append(out, s.step)
		}
	}
	return out
}

// QuickSteps lists the steps of Offers that a triage row offers in one
// click: taking the case on, and the step the case waits for.
func QuickSteps(st State, r cohort.Role) []Step {
	var out []Step
	for _, s := range stepTable {
		if working(st) && s.in(st) && s.quick(st) && s.who(r) {
			out = append(out, s.step)
		}
	}
	return out
}

// Offered reports whether a case in st offers step s to role r.
func Offered(st State, r cohort.Role, s Step) bool { return slices.Contains(Offers(st, r), s) }

// By reports whether role r may take step s at all, in whatever state.
func (s Step) By(r cohort.Role) bool {
	for _, rule := range stepTable {
		if rule.step == s {
			return rule.who(r)
		}
	}
	return false
}

// OfferedIn reports whether a case in st offers step s to the roles that may
// take it.
func (s Step) OfferedIn(st State) bool {
	for _, rule := range stepTable {
		if rule.step == s {
			return working(st) && rule.in(st)
		}
	}
	return false
}

// CheckStep refuses step s on a case in state st when the step table does
// not offer it there. For a step that moves the case the message is Move's,
// naming the allowed next states.
func CheckStep(st State, s Step) error {
	if s.OfferedIn(st) {
		return nil
	}
	for to, r := range stepReaches {
		if r.step == s {
			if err := Move(st, to); err != nil {
				return err
			}
		}
	}
	if st.Terminal() {
		return &cohort.ValidationError{Fields: map[string]string{"state": fmt.Sprintf(
			"the case is %s, which is final: it takes no more steps and nothing was recorded (a later screen-positive week opens a new case)", st.Label())}}
	}
	return &cohort.ValidationError{Fields: map[string]string{"state": fmt.Sprintf("a case that is %s does not take this step", st.Label())}}
}

// TakesRecordings says why a case in state st cannot take a recording, ""
// when it can: the recorder must have gone out and the case be still worked.
func TakesRecordings(st State) string {
	switch {
	case StepRecording.OfferedIn(st):
		return ""
	case st.Terminal():
		return "the case is closed (" + st.Label() + "); no recording can be added"
	}
	return "record the recorder's shipment first: the case is " + st.Label()
}

// The moves a case makes by itself, when what it waits for arrives. The
// store applies them in the transaction that records the arrival.

// AfterRecording is the state a case in state st moves to when a recording
// is added to it: a case waiting for its recorder has a recording in. ok is
// false when the case stays where it is.
func AfterRecording(st State) (next State, ok bool) {
	if st == RecorderSent {
		return RecordingReceived, true
	}
	return st, false
}

// AfterReadings is the state a case in state st moves to when the readings
// of its recordings change. diagnostic: at least one of its recordings now
// has a settled over-read long enough to read (overread.Conclusion's
// Diagnostic). A case waiting for an over-read has one; an over-read case
// whose corrected readings no longer settle any recording waits again. ok is
// false when the case stays where it is.
func AfterReadings(st State, diagnostic bool) (next State, ok bool) {
	switch {
	case st == RecordingReceived && diagnostic:
		return OverRead, true
	case st == OverRead && !diagnostic:
		return RecordingReceived, true
	}
	return st, false
}
