package overread

import (
	"fmt"
	"strings"

	"cohortdesk/cohort"
)

// Change is what a reader does to a reading already entered. The string
// value is stored.
type Change string

// The corrections of a reading.
const (
	Amended   Change = "amended"   // replaced by the reader's corrected reading
	Withdrawn Change = "withdrawn" // taken back: the recording no longer has it
)

// Label is the wording on pages.
func (c Change) Label() string {
	switch c {
	case Amended:
		return "amended"
	case Withdrawn:
		return "withdrawn"
	}
	return fmt.Sprintf("%q", string(c))
}

// MaxReasonChars is the longest reason a correction takes.
const MaxReasonChars = 1000

// Revision is a correction of one reading as its reader submits it.
type Revision struct {
	Role   Role   // the reading corrected
	Change Change // amended or withdrawn
	// Rhythm and Confidence are the corrected reading's (Amended only).
	Rhythm     Rhythm
	Confidence Confidence
	Reason     string
	By         int64 // the account of the person correcting it
}

// Revisable says which of the current readings its reader may still
// correct: the last one entered, since the readings after a reading rest on
// it (a second reading is compared with the first, an adjudication settles
// the two). "" when there is none.
func Revisable(current []Reading) Role {
	first, second, adj, err := byRole(current)
	switch {
	case err != nil:
		return ""
	case adj != nil:
		return Adjudication
	case second != nil:
		return Second
	case first != nil:
		return First
	}
	return ""
}

// Apply checks a correction against the current readings and returns the
// readings as they stand after it, the corrected reading first removed and,
// for an amendment, put back with its new rhythm and confidence (its reader
// and day unchanged: it corrects an entry). The rules: only the last reading
// entered (Revisable), only by its own reader, a reason of at most
// MaxReasonChars, and an amendment that changes the rhythm or the
// confidence to values from the lists. A refusal is a
// *cohort.ValidationError on the fields role, reader, rhythm, confidence and
// reason.
func (v Revision) Apply(current []Reading) ([]Reading, error) {
	var ve cohort.ValidationError
	last := Revisable(current)
	var old *Reading
	for i := range current {
		if current[i].Role == v.Role {
			old = &current[i]
		}
	}
	switch {
	case old == nil:
		ve.Add("role", fmt.Sprintf("this recording has no %s to correct", v.Role.Label()))
	case v.Role != last:
		ve.Add("role", fmt.Sprintf("the %s rests on the %s: only the last reading entered can be corrected", last.Label(), v.Role.Label()))
	case v.By == 0 || old.ReaderID != v.By:
		ve.Add("reader", "only "+old.Reader+", who gave this reading, can correct it")
	}
	reason := strings.TrimSpace(v.Reason)
	switch {
	case reason == "":
		ve.Add("reason", "say why the reading is "+v.Change.Label())
	case len(reason) > MaxReasonChars:
		ve.Add("reason", fmt.Sprintf("use at most %d characters", MaxReasonChars))
	}
	switch v.Change {
	case Withdrawn:
	case Amended:
		if !v.Rhythm.Valid() {
			ve.Add("rhythm", chooseRhythm)
		}
		if !v.Confidence.Valid() {
			ve.Add("confidence", "choose how sure you are")
		}
		if old != nil && v.Rhythm == old.Rhythm && v.Confidence == old.Confidence {
			ve.Add("rhythm", "the amendment changes neither the rhythm nor the confidence")
		}
	default:
		ve.Add("change", "choose whether to amend or withdraw the reading")
	}
	if err := ve.Err(); err != nil {
		return nil, err
	}
	var out []Reading
	for _, r := range current {
		if r.Role != v.Role {
			out = append(out, r)
			continue
		}
		if v.Change == Amended {
			r.Rhythm, r.Confidence = v.Rhythm, v.Confidence
			out = append(out, r)
		}
	}
	if _, err := Resolve(out); err != nil {
		return nil, err
	}
	return out, nil
}
