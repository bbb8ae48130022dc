// Package enrolment holds the rules of a participant's enrolment record: what
// a study ID looks like, the dates an enrolment and a withdrawal may carry,
// the age at enrolment, and the contact details the intake form checks; and
// the study's enrolment against target: the history of enrolments by site and
// week (Tally) and the projected date each target is reached (History.Project,
// with stats.ProjectEnrolment). Like all of cohort/ it is pure: the caller
// passes today's date in.
package enrolment

import (
	"slices"
	"strings"
	"time"

	"cohortdesk/cohort"
)

// Enrolment is what the enrol and edit forms say about a participant, as the
// rules check it. A zero date is unset.
type Enrolment struct {
	StudyID    string
	SiteID     int
	Sex        cohort.Sex
	TimeZone   string // IANA name of the participant's zone
	EnrolledOn cohort.Date
	BirthDate  *cohort.Date // PHI; nil when not recorded
	ZIP        string       // PHI; "" when not recorded
	Email      string       // PHI; "" when not recorded
}

// MaxAgeDays bounds the age at enrolment: a birth date more than 130 years
// earlier is a typing slip.
const MaxAgeDays = 130 * 366

// Check refuses an enrolment record the rules do not allow on the day today,
// field by field, with the form's field names.
func (e Enrolment) Check(today cohort.Date) error {
	var ve cohort.ValidationError
	id := strings.TrimSpace(e.StudyID)
	if id == "" || len(id) > 32 || strings.ContainsAny(id, " ,;\t\"'") {
		ve.Add("study_id", "enter a study ID of up to 32 characters without spaces, commas or quotes")
	}
	if e.SiteID <= 0 {
		ve.Add("site_id", "choose a site")
	}
	if !slices.Contains(cohort.Sexes(), e.Sex) {
		ve.Add("sex", "choose F, M or not recorded")
	}
	if _, err := time.LoadLocation(e.TimeZone); err != nil || e.TimeZone == "" {
		ve.Add("time_zone", "enter a time zone such as America/Chicago")
	}
	enrolled := !e.EnrolledOn.IsZero()
	switch {
	case !enrolled:
		ve.Add("enrolled_on", "enter the enrolment date as YYYY-MM-DD")
	case today.Before(e.EnrolledOn):
		ve.Add("enrolled_on", "the enrolment date is in the future")
		enrolled = false // the birth date cannot be checked against it
	}
	if b := e.BirthDate; b != nil && enrolled {
		switch {
		case !b.Before(e.EnrolledOn):
			ve.Add("birth_date", "the birth date must be before the enrolment date")
		case e.EnrolledOn.DaysSince(*b) > MaxAgeDays:
			ve.Add("birth_date", "the birth date is more than 130 years before enrolment")
		}
	}
	if z := strings.TrimSpace(e.ZIP); z != "" && !zipOK(z) {
		ve.Add("zip", "enter a 5-digit ZIP code (or ZIP+4)")
	}
	if m := strings.TrimSpace(e.Email); m != "" && !strings.Contains(m, "@") {
		ve.Add("email", "enter an e-mail address such as name@example.org")
	}
	return ve.Err()
}

// zipOK accepts a US ZIP code: five digits, or ZIP+4 with or without the dash.
func zipOK(z string) bool {
	if len(z) == 10 && z[5] == '-' {
		z = z[:5] + z[6:]
	}
	if len(z) != 5 && len(z) != 9 {
		return false
	}
	return strings.Trim(z, "0123456789") == ""
}

// AgeAt is the age in whole years on the day at of someone born on birth;
// nil when the birth date is not recorded. A birthday on 29 February counts
// from 1 March in other years.
func AgeAt(birth *cohort.Date, at cohort.Date) *int {
	if birth == nil {
		return nil
	}
	age := at.Year - birth.Year
	if at.Month < birth.Month || (at.Month == birth.Month && at.Day < birth.Day) {
		age--
	}
	return &age
}

// Withdrawal is a recorded withdrawal as the form gives it.
type Withdrawal struct {
	On     cohort.Date
	Reason string
}

// Check refuses a withdrawal on the day today: a date that is unset or in the
// future, or no reason.
func (w Withdrawal) Check(today cohort.Date) error {
	var ve cohort.ValidationError
	switch {
	case w.On.IsZero():
		ve.Add("withdrawn_on", "enter the withdrawal date as YYYY-MM-DD")
	case today.Before(w.On):
		ve.Add("withdrawn_on", "the withdrawal date is in the future")
	}
	if strings.TrimSpace(w.Reason) == "" {
		ve.Add("reason", "give the reason the participant gave (or 'not given')")
	}
	return ve.Err()
}

// CheckAgainst refuses a withdrawal of a participant enrolled on enrolled
// and, when withdrawn is not nil, already withdrawn on that day.
func (w Withdrawal) CheckAgainst(enrolled cohort.Date, withdrawn *cohort.Date) error {
	switch {
	case withdrawn != nil:
		return &cohort.ValidationError{Fields: map[string]string{"withdrawn_on": "already withdrawn on " + withdrawn.String()}}
	case w.On.Before(enrolled):
		return &cohort.ValidationError{Fields: map[string]string{"withdrawn_on": "the withdrawal date is before enrolment (" + enrolled.String() + ")"}}
	}
	return nil
}

// MaxNoteLength bounds a note on a participant.
const MaxNoteLength = 4000

// CheckNote refuses an empty note or one over MaxNoteLength characters.
func CheckNote(body string) error {
	if b := strings.TrimSpace(body); b == "" || len(b) > MaxNoteLength {
		return &cohort.ValidationError{Fields: map[string]string{"body": "write a note of 1 to 4000 characters"}}
	}
	return nil
}
