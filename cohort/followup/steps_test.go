package followup

import (
	"slices"
	"strings"
	"testing"

	"cohortdesk/cohort"
)

// The step table written out a second time, as the specification the code
// must match (ours: the steps the case page and the triage rows offered
// before the rule had one home). A coordinator may take every step.
var wantCoordinatorOffers = map[State][]Step{
	Open:               {StepAssign, StepAttempt, StepMessage, StepMove, StepClose, StepNote},
	Contacting:         {StepAssign, StepAttempt, StepMessage, StepMove, StepClose, StepNote},
	Reached:            {StepAssign, StepAttempt, StepMessage, StepShipment, StepClose, StepNote},                            // "recorder sent" only by the shipment
	RecorderSent:       {StepAssign, StepAttempt, StepMessage, StepShipment, StepReturn, StepRecording, StepClose, StepNote}, // "recording received" only by the return
	RecordingReceived:  {StepAssign, StepAttempt, StepMessage, StepShipment, StepRecording, StepMove, StepClose, StepNote},   // a repeat shipment
	OverRead:           {StepAssign, StepAttempt, StepMessage, StepRecording, StepClose, StepNote},                           // every way on from an over-read ends the case
	Referred:           nil,
	ClosedNotConfirmed: nil,
	ClosedUnreachable:  nil,
	ClosedDeclined:     nil,
	ClosedWithdrawn:    nil,
}

// wantClinical are the investigators' own steps: reading the case's
// recordings once the recorder went out, signing the summary off once the
// case is over-read.
var wantClinical = map[State][]Step{
	RecorderSent:      {StepOverRead},
	RecordingReceived: {StepOverRead},
	OverRead:          {StepOverRead, StepSignOff},
}

// wantQuick are the one-click steps of a coordinator's triage row: taking the
// case on, and the step the case waits for.
var wantQuick = map[State][]Step{
	Open:              {StepAssign, StepAttempt, StepMessage},
	Contacting:        {StepAssign, StepAttempt, StepMessage},
	Reached:           {StepAssign, StepShipment},
	RecorderSent:      {StepAssign, StepAttempt, StepMessage},
	RecordingReceived: {StepAssign},
	OverRead:          {StepAssign},
}

// contactSteps are left to the roles that reach participants.
var contactSteps = []Step{StepAttempt, StepMessage, StepShipment, StepReturn, StepRecording}

func without(steps []Step, drop []Step) []Step {
	var out []Step
	for _, s := range steps {
		if !slices.Contains(drop, s) {
			out = append(out, s)
		}
	}
	return out
}

func TestOffersByStateAndRole(t *testing.T) {
	if len(wantCoordinatorOffers) != len(States()) {
		t.Fatalf("the specification covers %d states, there are %d", len(wantCoordinatorOffers), len(States()))
	}
	for _, st := range States() {
		coord := wantCoordinatorOffers[st]
		for _, c := range []struct {
			role cohort.Role
			want []Step
		}{
			{cohort.Coordinator, coord},
			{cohort.Admin, coord},
			{cohort.Investigator, append(without(coord, contactSteps), wantClinical[st]...)},
			{cohort.Monitor, nil},
			{cohort.Role("visitor"), nil},
		} {
			if got := Offers(st, c.role); !slices.Equal(got, c.want) {
				t.Errorf("Offers(%s, %s) = %v, want %v", st, c.role, got, c.want)
			}
			for _, s := range append(slices.Clone(coord), StepReturn, StepOverRead, StepSignOff) {
				if got, want := Offered(st, c.role, s), slices.Contains(c.want, s); got != want {
					t.Errorf("Offered(%s, %s, %s) = %v, want %v", st, c.role, s, got, want)
				}
			}
			wantQ := wantQuick[st]
			if c.role == cohort.Investigator {
				wantQ = without(wantQ, contactSteps)
				if st == RecordingReceived {
					wantQ = append(wantQ, StepOverRead) // "read the ECG" from the row
				}
			}
			if c.role == cohort.Monitor || c.role == "visitor" {
				wantQ = nil
			}
			if got := QuickSteps(st, c.role); !slices.Equal(got, wantQ) {
				t.Errorf("QuickSteps(%s, %s) = %v, want %v", st, c.role, got, wantQ)
			}
		}
	}
	if got := Offers(State("lost"), cohort.Coordinator); got != nil {
		t.Errorf("an unknown state offers %v", got)
	}
}

func TestQuickStepsAreOffers(t *testing.T) {
	for _, st := range States() {
		for _, r := range cohort.Roles {
			for _, s := range QuickSteps(st, r) {
				if !Offered(st, r, s) {
					t.Errorf("%s's triage row offers %s to %s, the case page does not", st, s, r)
				}
			}
		}
	}
}

func TestWhoWorksCases(t *testing.T) {
	for _, c := range []struct {
		role           cohort.Role
		works, reaches bool
	}{
		{cohort.Coordinator, true, true},
		{cohort.Admin, true, true},
		{cohort.Investigator, true, false},
		{cohort.Monitor, false, false},
		{cohort.Role(""), false, false},
	} {
		if WorksCases(c.role) != c.works || ReachesParticipants(c.role) != c.reaches {
			t.Errorf("%q: works cases %v, reaches participants %v; want %v, %v", c.role, WorksCases(c.role), ReachesParticipants(c.role), c.works, c.reaches)
		}
		if StepAssign.By(c.role) != c.works || StepAttempt.By(c.role) != c.reaches || StepRecording.By(c.role) != c.reaches {
			t.Errorf("%q: the step table disagrees with the role rules", c.role)
		}
		// Working cases and seeing contact details go together.
		if c.role.Valid() && WorksCases(c.role) != c.role.SeesPHI() {
			t.Errorf("%s works cases %v but sees PHI %v", c.role, WorksCases(c.role), c.role.SeesPHI())
		}
	}
	if got, want := CaseWorkerRoles(), []cohort.Role{cohort.Coordinator, cohort.Investigator, cohort.Admin}; !slices.Equal(got, want) {
		t.Errorf("CaseWorkerRoles() = %v, want %v", got, want)
	}
	if Step("fly").By(cohort.Admin) || Step("fly").OfferedIn(Open) {
		t.Error("an unknown step is offered")
	}
}

func TestTakesRecordings(t *testing.T) {
	for _, c := range []struct {
		st   State
		want string
	}{
		{RecorderSent, ""},
		{RecordingReceived, ""},
		{OverRead, ""},
		{Open, "record the recorder's shipment first: the case is open"},
		{Reached, "record the recorder's shipment first: the case is reached"},
		{Referred, "the case is closed (referred); no recording can be added"},
		{ClosedDeclined, "the case is closed (closed (declined)); no recording can be added"},
	} {
		if got := TakesRecordings(c.st); got != c.want {
			t.Errorf("TakesRecordings(%s) = %q, want %q", c.st, got, c.want)
		}
		if got := StepRecording.OfferedIn(c.st); got != (c.want == "") {
			t.Errorf("StepRecording.OfferedIn(%s) = %v", c.st, got)
		}
	}
}

func TestCheckStep(t *testing.T) {
	for _, c := range []struct {
		st       State
		step     Step
		contains string // "" when the step is taken
	}{
		{Reached, StepShipment, ""},
		{RecorderSent, StepShipment, ""}, // a correction
		{RecordingReceived, StepShipment, ""},
		{Open, StepShipment, "cannot move from open to recorder sent; allowed next states: contacting"},
		{Referred, StepShipment, "none, referred is final"},
		{RecorderSent, StepReturn, ""},
		{Reached, StepReturn, "cannot move from reached to recording received"},
		{Open, StepRecording, "a case that is open does not take this step"},
		{ClosedDeclined, StepAttempt, "the case is closed (declined), which is final: it takes no more steps"},
		{Referred, StepAssign, "the case is referred, which is final"},
		{ClosedWithdrawn, StepNote, "takes no more steps"},
	} {
		got := fields(t, CheckStep(c.st, c.step))["state"]
		if (c.contains == "") != (got == "") || !strings.Contains(got, c.contains) {
			t.Errorf("CheckStep(%s, %s) = %q, want %q", c.st, c.step, got, c.contains)
		}
	}
}

// TestStatesWithAStepAreReachedByIt: "recorder sent", "recording received"
// and "referred" are reached by the shipment, the return and the sign-off,
// never by a plain move or closing, so the case page offers one way to each
// (finding: "Move to recording received" repeated "Record return", and a case
// could be closed as referred without a signed summary).
func TestStatesWithAStepAreReachedByIt(t *testing.T) {
	for _, st := range States() {
		for _, n := range HandMoves(st) {
			if n == RecorderSent || n == RecordingReceived || n == Referred {
				t.Errorf("HandMoves(%s) offers %s", st, n)
			}
			if !CanMove(st, n) {
				t.Errorf("HandMoves(%s) offers %s, which the state table does not allow", st, n)
			}
		}
	}
	if got, want := HandMoves(OverRead), []State{ClosedNotConfirmed, ClosedWithdrawn}; !slices.Equal(got, want) {
		t.Errorf("HandMoves(over-read) = %v, want %v", got, want)
	}
	for _, c := range []struct {
		from, to State
		closing  bool
		contains string
	}{
		{OverRead, Referred, true, "an investigator signs the case's referral summary off"},
		{RecorderSent, RecordingReceived, false, "record the recording's return"},
		{Reached, RecorderSent, false, "record the recorder's shipment"},
		{OverRead, ClosedNotConfirmed, true, ""},
		{Contacting, Reached, false, ""},
	} {
		got := fields(t, CheckHandMove(c.from, c.to, "a reason", c.closing))["state"]
		if (c.contains == "") != (got == "") || !strings.Contains(got, c.contains) {
			t.Errorf("CheckHandMove(%s, %s) = %q, want %q", c.from, c.to, got, c.contains)
		}
	}
	// The system's own moves (a sign-off, a return) still pass CheckMove.
	if err := CheckMove(OverRead, Referred, "referral summary 3 signed off", false); err != nil {
		t.Errorf("the sign-off's move is refused: %v", err)
	}
}

// The moves a case makes by itself: a recording in moves only a case
// waiting for its recorder; readings move only between waiting for an
// over-read and over-read, and never a closed case. Every such move is one
// the state table allows.
func TestMovesWhenWhatTheCaseWaitsForArrives(t *testing.T) {
	for _, st := range States() {
		next, ok := AfterRecording(st)
		if want := st == RecorderSent; ok != want || (ok && next != RecordingReceived) || (!ok && next != st) {
			t.Errorf("AfterRecording(%s) = %s, %v", st, next, ok)
		}
		for _, diagnostic := range []bool{true, false} {
			next, ok := AfterReadings(st, diagnostic)
			want := State("")
			switch {
			case st == RecordingReceived && diagnostic:
				want = OverRead
			case st == OverRead && !diagnostic:
				want = RecordingReceived
			}
			if ok != (want != "") || (ok && next != want) || (!ok && next != st) {
				t.Errorf("AfterReadings(%s, %v) = %s, %v; want %q", st, diagnostic, next, ok, want)
			}
			if ok && st.Terminal() {
				t.Errorf("AfterReadings moves the closed state %s", st)
			}
			if ok && !CanMove(st, next) {
				t.Errorf("AfterReadings(%s) = %s, a move the state table does not allow", st, next)
			}
		}
		if ok && !CanMove(st, next) {
			t.Errorf("AfterRecording(%s) = %s, a move the state table does not allow", st, next)
		}
	}
}
