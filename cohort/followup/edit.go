package followup

import (
	"fmt"
	"slices"
	"strings"
	"time"

	"cohortdesk/cohort"
)

// Edit is a kind of change to a case, named as the audit trail records it.
// The values are stored, so they never change; the label may be reworded.
type Edit string

// The edits of a case: by people, and by the system as the consequence of a
// step recorded elsewhere.
const (
	EditOpen      Edit = "case.open"           // a positive episode opened the case
	EditExtend    Edit = "case.extend"         // positive weeks joined the episode
	EditLateWeeks Edit = "case.late_weeks"     // positive weeks arrived after the case ended
	EditAssign    Edit = "case.assign"         // the owner changed
	EditAttempt   Edit = "case.attempt"        // a contact attempt was logged
	EditMove      Edit = "case.move"           // the state changed by hand
	EditClose     Edit = "case.close"          // the case was ended by hand
	EditShipment  Edit = "case.recorder_sent"  // the recorder's shipment was recorded
	EditReturn    Edit = "case.recording_back" // the recording's return was recorded
	EditNote      Edit = "case.note"           // the working note changed
	EditWithdrawn Edit = "case.withdrawn"      // closed because the participant withdrew
	EditAdvance   Edit = "case.advance"        // moved on by a step recorded elsewhere
	EditMessage   Edit = "case.message_result" // a message the desk sent did not reach the participant
)

var editLabels = map[Edit]string{
	EditOpen:      "opened the case",
	EditExtend:    "added screen-positive weeks",
	EditLateWeeks: "recorded late positive weeks",
	EditAssign:    "changed the owner",
	EditAttempt:   "logged a contact attempt",
	EditMove:      "changed the state",
	EditClose:     "closed the case",
	EditShipment:  "recorded the recorder shipment",
	EditReturn:    "recorded the recording's return",
	EditNote:      "changed the working note",
	EditWithdrawn: "closed the case after the participant withdrew",
	EditAdvance:   "moved the case on after a step recorded elsewhere",
	EditMessage:   "recorded that a message did not reach the participant",
}

// Label says in a few words what the edit did, for conflict messages and the
// case timeline; an unknown value is shown as it is.
func (e Edit) Label() string {
	if l, ok := editLabels[e]; ok {
		return l
	}
	return string(e)
}

// Intent is what a person meant to set, applied to the fields they saw; it
// words the refusal when their copy was stale.
type Intent func(base CaseFields) CaseFields

// SetState is the intent of an edit that moves the case to to.
func SetState(to State) Intent {
	return func(b CaseFields) CaseFields { b.State = to; return b }
}

// SetOwner is the intent of giving the case to the person named.
func SetOwner(name string) Intent {
	return func(b CaseFields) CaseFields { b.Owner = name; return b }
}

// SetNote is the intent of changing the working note.
func SetNote(note string) Intent {
	return func(b CaseFields) CaseFields { b.Note = note; return b }
}

// LogAttempt is the intent of logging an attempt with outcome o: the move
// AfterAttempt makes, if any.
func LogAttempt(o Outcome) Intent {
	return func(b CaseFields) CaseFields {
		if next, move, err := AfterAttempt(b.State, o); err == nil && move {
			b.State = next
		}
		return b
	}
}

// Enter moves the facts to state to at time at. It records the time of the
// step the state stands for when the case first reaches it, so the next
// deadline counts from it. Going back from "recording received" to "recorder
// sent" is a repeat shipment: its time is the new shipment and the returned
// recording is no longer awaited. Enter does not check the move; Move does.
func (c *CaseFacts) Enter(to State, at time.Time) {
	from := c.State
	switch to {
	case Reached:
		if c.ReachedAt.IsZero() {
			c.ReachedAt = at
		}
	case RecorderSent:
		if from == RecordingReceived || c.RecorderSentAt.IsZero() {
			c.RecorderSentAt = at
		}
		if from == RecordingReceived {
			c.RecordingReceivedAt = time.Time{}
		}
	case RecordingReceived:
		if c.RecordingReceivedAt.IsZero() {
			c.RecordingReceivedAt = at
		}
		if from == OverRead {
			c.OverReadAt = time.Time{} // the over-read it had was withdrawn
		}
	case OverRead:
		if c.OverReadAt.IsZero() {
			c.OverReadAt = at
		}
	}
	c.State = to
}

// Edited is one edit made to a case, by whom (as the audit trail names them).
type Edited struct {
	By   string
	Edit Edit
}

// StaleCopy is what is known when a person saves a case from a copy that is
// no longer current.
type StaleCopy struct {
	Seen        *CaseFields // the fields at the version they saw; nil when no record of it is left
	SeenVersion int
	Now         CaseFields // the fields as stored now
	NowVersion  int
	Since       []Edited // the edits made since their version, oldest first
}

// Refusal words the refusal of an edit with intent made on a stale copy: the
// fields that changed (Conflict's message, or, when nothing the person was
// about to set collides, the changes they have not seen, since their choice
// may rest on what they saw), then who changed the case since. Changes holds
// {theirs, yours} per field.
func (s StaleCopy) Refusal(intent Intent) *cohort.ConflictError {
	var ce *cohort.ConflictError
	if s.Seen != nil {
		yours := intent(*s.Seen)
		ce = Conflict(*s.Seen, s.Now, yours)
		if ce == nil {
			shown := Diff(CaseFields{}, yours)
			changes := map[string][2]string{}
			var parts []string
			for f, v := range Diff(*s.Seen, s.Now) {
				changes[f] = [2]string{v[1], shown[f][1]}
				parts = append(parts, fmt.Sprintf("%s is now %q", f, v[1]))
			}
			slices.Sort(parts)
			msg := "someone else changed this case after you opened it"
			if len(parts) > 0 {
				msg += " (" + strings.Join(parts, "; ") + ")"
			}
			ce = &cohort.ConflictError{Message: msg + "; check their changes and try again", Changes: changes}
		}
	}
	if ce == nil {
		ce = &cohort.ConflictError{Message: fmt.Sprintf("this case is at version %d, not the version %d you opened; reload it and try again", s.NowVersion, s.SeenVersion)}
	}
	var who []string
	for _, e := range s.Since {
		w := e.By + " " + e.Edit.Label()
		if !slices.Contains(who, w) {
			who = append(who, w)
		}
	}
	if len(who) > 0 {
		ce.Message = strings.TrimSuffix(ce.Message, ".") + ". Since you opened it: " + strings.Join(who, "; ") + "."
	}
	return ce
}
