package followup

import (
	"slices"
	"strings"
	"time"

	"cohortdesk/cohort"
)

// The rules of what people enter on a case. Each check returns a
// *cohort.ValidationError keyed by the form's field names, in words fit to
// show beside the field; the web layer has already read the form into these
// types, so what is checked here is the case's own rules.

// AttemptSkew is how far in the future an attempt time may lie: the clocks of
// staff computers drift a little.
const AttemptSkew = 5 * time.Minute

// AttemptEntry is a contact attempt as a person enters it.
type AttemptEntry struct {
	Channel Channel
	Outcome Outcome
	Note    string    // free text, trimmed; stays inside the system
	At      time.Time // when it was made; zero: now
}

// LetterNote is the note of a letter logged for many cases at once.
const LetterNote = "letter sent"

// Letter is the attempt a sent letter stands for: by letter, with a message
// left, since a letter asks the participant to get in touch and has had no
// answer yet. note is added to LetterNote.
func Letter(note string) AttemptEntry {
	n := strings.TrimSpace(LetterNote + "; " + strings.TrimSpace(note))
	return AttemptEntry{Channel: ChannelLetter, Outcome: OutcomeMessageLeft, Note: strings.TrimSuffix(n, ";")}
}

// Check refuses an attempt on a case flagged at flagged: a channel and an
// outcome chosen, a note of at most 2000 characters, and a time neither in
// the future (now, give or take AttemptSkew) nor before the flag (shown in
// the study's zone loc).
func (e AttemptEntry) Check(flagged, now time.Time, loc *time.Location) error {
	var ve cohort.ValidationError
	if !e.Channel.Valid() {
		ve.Add("channel", "choose how you tried to reach the participant")
	}
	if !slices.Contains(Outcomes(), e.Outcome) {
		ve.Add("outcome", "choose what came of the attempt")
	}
	if len(e.Note) > 2000 {
		ve.Add("note", "use at most 2000 characters")
	}
	switch {
	case e.At.IsZero():
	case e.At.After(now.Add(AttemptSkew)):
		ve.Add("at", "the attempt time is in the future")
	case e.At.Before(flagged.Truncate(time.Minute)):
		ve.Add("at", "the attempt time is before the case was flagged ("+cohort.TimeLabel(flagged, loc)+")")
	}
	return ve.Err()
}

// ClosingNote is the closing reason of a case the attempt closes (a decline).
func (e AttemptEntry) ClosingNote() string {
	return "declined when contacted (" + e.Channel.Label() + ")"
}

// WithdrawnNote is the closing reason of a case closed because the
// participant withdrew.
const WithdrawnNote = "the participant withdrew from the study"

// checkStepDay refuses the day of a step that lies in the future or before
// the day of the step before it (notBefore, named in words by what); days
// are counted in the study's zone loc.
func checkStepDay(ve *cohort.ValidationError, field string, d cohort.Date, now time.Time, loc *time.Location, notBefore time.Time, what string) {
	if cohort.DateOf(now.In(loc)).Before(d) {
		ve.Add(field, "the date is in the future")
		return
	}
	if !notBefore.IsZero() {
		if first := cohort.DateOf(notBefore.In(loc)); d.Before(first) {
			ve.Add(field, "the date is before "+what+" ("+first.Label()+")")
		}
	}
}

// StepTime is the instant stored for a step entered as a day: now when the
// day is today in the study's zone, else noon of that day, which keeps the
// right day in every zone and orders after morning events of the same day.
func StepTime(d cohort.Date, now time.Time, loc *time.Location) time.Time {
	if cohort.DateOf(now.In(loc)) == d {
		return now
	}
	return time.Date(d.Year, d.Month, d.Day, 12, 0, 0, 0, loc)
}

// CheckShipment refuses a recorder shipment: a tracking number of at most 64
// characters, sent neither in the future nor before the participant was
// reached.
func CheckShipment(sentOn cohort.Date, tracking string, reachedAt, now time.Time, loc *time.Location) error {
	var ve cohort.ValidationError
	if len(tracking) > 64 {
		ve.Add("tracking_number", "use at most 64 characters")
		return ve.Err()
	}
	checkStepDay(&ve, "sent_on", sentOn, now, loc, reachedAt, "the participant was reached")
	return ve.Err()
}

// CheckReturn refuses the day a recording came back that lies in the future
// or before the recorder was sent.
func CheckReturn(backOn cohort.Date, sentAt, now time.Time, loc *time.Location) error {
	var ve cohort.ValidationError
	checkStepDay(&ve, "back_on", backOn, now, loc, sentAt, "the recorder was sent")
	return ve.Err()
}

// CheckMove refuses a change of state from from to to: one the state table
// does not allow (Move's message names the allowed states), a final state
// without a reason, a reason over 1000 characters, and, when closing, a state
// that does not end the case (the message names the ways it can end).
func CheckMove(from, to State, reason string, closing bool) error {
	if closing && !to.Terminal() {
		var finals []string
		for _, n := range Next(from) {
			if n.Terminal() {
				finals = append(finals, n.Label())
			}
		}
		msg := "choose how the case ends"
		if len(finals) > 0 {
			msg += ": " + strings.Join(finals, ", ")
		}
		return &cohort.ValidationError{Fields: map[string]string{"state": msg}}
	}
	if err := Move(from, to); err != nil {
		return err
	}
	switch {
	case to.Terminal() && reason == "":
		return &cohort.ValidationError{Fields: map[string]string{"reason": "say why the case ends this way"}}
	case len(reason) > 1000:
		return &cohort.ValidationError{Fields: map[string]string{"reason": "use at most 1000 characters"}}
	}
	return nil
}

// CheckNote refuses a working note over 500 characters.
func CheckNote(note string) error {
	if len(note) > 500 {
		return &cohort.ValidationError{Fields: map[string]string{"note": "use at most 500 characters"}}
	}
	return nil
}

// CheckOwner refuses an owner who may not work cases: an account that is not
// active (or does not exist: active false) or whose role does not work cases.
func CheckOwner(active bool, r cohort.Role) error {
	if !active || !WorksCases(r) {
		return &cohort.ValidationError{Fields: map[string]string{"owner": "choose an active coordinator, investigator or administrator"}}
	}
	return nil
}
