package referral

import (
	"fmt"
	"strings"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/deid"
)

// Status is where an issued summary stands.
type Status int

// The statuses of an issued summary.
const (
	// Issued: a summary recorded before drafts existed, without a sign-off
	// in its content (the record says whether it was signed off).
	Issued Status = iota
	// Drafted: issued and waiting for an investigator's sign-off.
	Drafted
	// Signed: signed off; the content names who signed and when.
	Signed
)

// Status reads a summary's status from its content.
func (s Summary) Status() Status {
	switch {
	case s.SignOff != nil:
		return Signed
	case s.Draft:
		return Drafted
	}
	return Issued
}

// DraftMark is what a draft summary prints at its head and on every page.
const DraftMark = "DRAFT: not signed off. Do not send until a study investigator has signed it off."

// SignOffText words a signed summary's sign-off: "Signed off by Name on
// study day 63".
func (v SignOffView) Text() string {
	return fmt.Sprintf("Signed off by %s on study day %d", v.By, v.StudyDay)
}

// Sign returns the summary as signed off by the person named by at the time
// at, counted as a study day from the participant's enrolment day in their
// zone loc (nil is UTC). The signed summary is new content with its own
// digest; the draft stays as it was recorded. A summary already signed, or
// a signer without a name, is refused.
func Sign(s Summary, by string, enrolled cohort.Date, loc *time.Location, at time.Time) (Summary, error) {
	by = strings.TrimSpace(by)
	switch {
	case s.SignOff != nil:
		return Summary{}, fmt.Errorf("referral: the summary is already signed off: %w", ErrInvalid)
	case by == "":
		return Summary{}, fmt.Errorf("referral: the signer has no name: %w", ErrInvalid)
	case at.IsZero():
		return Summary{}, fmt.Errorf("referral: the sign-off time is not set: %w", ErrInvalid)
	}
	if loc == nil {
		loc = time.UTC
	}
	out := s
	out.Cautions = append([]string(nil), s.Cautions...)
	out.Draft = false
	out.SignOff = &SignOffView{By: by, StudyDay: deid.StudyTimeAt(enrolled, loc, at).Day}
	if err := checkFields(out); err != nil {
		return Summary{}, err
	}
	return out, nil
}
