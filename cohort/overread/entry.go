package overread

import (
	"errors"
	"fmt"
	"strings"

	"cohortdesk/cohort"
)

// MaxCommentChars is the longest comment a reading takes.
const MaxCommentChars = 2000

// chooseRhythm refuses a reading without a rhythm from the list.
const chooseRhythm = "choose the rhythm you see"

// Entry is a new reading as a reader, or a loader, submits it.
type Entry struct {
	// Reading is the reading. Role "" takes the one due (Next), for
	// loaders; the form names the role it offered, so two people entering
	// at once cannot both be first. On zero is today. ReaderID 0 says the
	// reader is not an active investigator.
	Reading
	// Comment is free text; it stays inside the system.
	Comment string
}

// Settle checks an entry against the readings entered so far and returns it
// ready to store: the role due filled in, the day set, the comment trimmed.
// today is the day of entry and taken the day the recording was taken, both
// in the study's zone. The rules: a rhythm and a confidence from the lists,
// a comment of at most MaxCommentChars, a reader who is an active
// investigator, a reading day neither in the future nor before the recording
// was taken, and the order of Check. Every refusal comes at once in a
// *cohort.ValidationError on the fields rhythm, confidence, comment, reader,
// read_on and role.
func (e Entry) Settle(existing []Reading, today, taken cohort.Date) (Entry, error) {
	var ve cohort.ValidationError
	if e.Role == "" {
		e.Role = Next(existing)
	}
	if !e.Rhythm.Valid() {
		ve.Add("rhythm", chooseRhythm)
	}
	if !e.Confidence.Valid() {
		ve.Add("confidence", "choose how sure you are")
	}
	e.Comment = strings.TrimSpace(e.Comment)
	if len(e.Comment) > MaxCommentChars {
		ve.Add("comment", fmt.Sprintf("use at most %d characters", MaxCommentChars))
	}
	if e.ReaderID == 0 {
		ve.Add("reader", "over-reads are entered by an active investigator")
	}
	switch {
	case e.On.IsZero():
		e.On = today
	case today.Before(e.On):
		ve.Add("read_on", "the date is in the future")
	case e.On.Before(taken):
		ve.Add("read_on", "the date is before the recording was taken ("+taken.Label()+")")
	}
	if e.Rhythm.Valid() {
		if err := Check(existing, e.Reading); err != nil {
			var ce *cohort.ValidationError
			if !errors.As(err, &ce) {
				return Entry{}, err
			}
			for f, m := range ce.Fields {
				ve.Add(f, m)
			}
		}
	}
	if err := ve.Err(); err != nil {
		return Entry{}, err
	}
	return e, nil
}
