package followup

import (
	"fmt"
	"sort"
	"strings"
	"time"

	"cohortdesk/cohort"
)

// CaseFields are the fields of a case a user edits on the case form; the store
// guards them with a version number and, on a stale save, uses Diff and
// Conflict to tell the user what changed underneath them.
type CaseFields struct {
	State State
	Owner string    // user name of the person working the case; empty when nobody
	Due   time.Time // next-action deadline set by hand; zero means computed by NextDue
	Note  string    // short working note shown on the triage list
}

// Field names used as keys by Diff; they match the form's field names so the
// conflict message can sit beside the right input.
const (
	FieldState = "state"
	FieldOwner = "owner"
	FieldDue   = "due"
	FieldNote  = "note"
)

// dueLayout shows a deadline in the one date style with its zone, so two
// readers in different zones cannot misread it (cohort.TimeLayout).
const dueLayout = cohort.TimeLayout

// Diff returns the fields that differ between before and after, each with its
// {before, after} value as shown to people: the state's label, the deadline
// in its own zone, and "" for unset values. Deadlines are compared as
// instants, so the same moment in two zones is not a change.
func Diff(before, after CaseFields) map[string][2]string {
	out := map[string][2]string{}
	if before.State != after.State {
		out[FieldState] = [2]string{stateText(before.State), stateText(after.State)}
	}
	if before.Owner != after.Owner {
		out[FieldOwner] = [2]string{before.Owner, after.Owner}
	}
	if !before.Due.Equal(after.Due) {
		out[FieldDue] = [2]string{dueText(before.Due), dueText(after.Due)}
	}
	if before.Note != after.Note {
		out[FieldNote] = [2]string{before.Note, after.Note}
	}
	return out
}

func stateText(s State) string {
	if s == "" {
		return ""
	}
	return s.Label()
}

func dueText(t time.Time) string {
	if t.IsZero() {
		return ""
	}
	return t.Format(dueLayout)
}

// Conflict builds the error for a save based on a stale copy. base is what
// the user loaded, theirs what is stored now, yours what the user submitted.
// Every field someone else changed is listed when the user's submission
// holds a different value for it (Changes holds {theirs, yours}), including a
// field the user left as loaded: saving it would silently undo the other
// person's change. When there is no such field (the other save touched only
// the version, or made the same edit) Conflict returns nil and the store may
// apply the submission.
func Conflict(base, theirs, yours CaseFields) *cohort.ConflictError {
	changed := Diff(base, theirs)
	mine := Diff(theirs, yours)
	changes := map[string][2]string{}
	for f, v := range changed {
		if y, differs := mine[f]; differs {
			changes[f] = [2]string{v[1], y[1]}
		}
	}
	if len(changes) == 0 {
		return nil
	}
	fields := make([]string, 0, len(changes))
	for f := range changes {
		fields = append(fields, f)
	}
	sort.Strings(fields)
	parts := make([]string, len(fields))
	for i, f := range fields {
		parts[i] = fmt.Sprintf("%s is now %s", f, shown(changes[f][0]))
	}
	return &cohort.ConflictError{
		Message: "someone else changed this case after you opened it (" + strings.Join(parts, "; ") +
			"); check their changes and save again",
		Changes: changes,
	}
}

// shown quotes a value for the message, naming an empty one.
func shown(v string) string {
	if v == "" {
		return "(none)"
	}
	return fmt.Sprintf("%q", v)
}
