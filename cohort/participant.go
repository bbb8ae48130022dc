package cohort

import "fmt"

// ParticipantStatus is where a participant stands in the study. The string
// value is what filters and CSV files carry.
type ParticipantStatus string

// The participant statuses.
const (
	StatusActive    ParticipantStatus = "active"    // enrolled, within the study's weeks of follow-up
	StatusCompleted ParticipantStatus = "completed" // the study's weeks of follow-up are over
	StatusWithdrawn ParticipantStatus = "withdrawn" // left the study (a withdrawal is recorded)
)

// ParticipantStatuses lists the statuses in the order pages list them.
func ParticipantStatuses() []ParticipantStatus {
	return []ParticipantStatus{StatusActive, StatusCompleted, StatusWithdrawn}
}

// Valid reports whether s is one of the statuses.
func (s ParticipantStatus) Valid() bool {
	return s == StatusActive || s == StatusCompleted || s == StatusWithdrawn
}

// Label is the wording on pages.
func (s ParticipantStatus) Label() string {
	if s.Valid() {
		return string(s)
	}
	return fmt.Sprintf("%q", string(s))
}

// StatusOf is the one rule for a participant's status on the day today (in
// the study's time zone): withdrawn once a withdrawal is recorded; else
// completed from the day the study's followUpWeeks of follow-up end (the
// enrolment day plus 7 x followUpWeeks days); else active. followUpWeeks 0
// is an open-ended study, in which nobody completes. The store counts and
// filters with the same rule in SQL (db.participantStatus), and a test holds
// the two together.
func StatusOf(enrolled Date, withdrawn *Date, followUpWeeks int, today Date) ParticipantStatus {
	switch {
	case withdrawn != nil:
		return StatusWithdrawn
	case followUpWeeks > 0 && !today.Before(enrolled.AddDays(7*followUpWeeks)):
		return StatusCompleted
	}
	return StatusActive
}
