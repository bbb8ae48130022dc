package web

import (
	"context"
	"time"

	"cohortdesk/cohort"
)

// Dates and times on pages follow one rule (cohort/dates.go, DEVELOPERS.md
// "Dates and times"): one date style, the study's zone for the team's work,
// the participant's zone where their day matters, each time labelled with its
// zone. These helpers are the only way handlers write them.

// studyZone is the study's time zone, in which the team's work is dated; UTC
// before the study is set up (or when it cannot be read: a page still shows,
// with the zone it used named beside every time).
func (s *Server) studyZone(ctx context.Context) *time.Location {
	st, err := s.store.StudySettings(ctx)
	if err != nil {
		return time.UTC
	}
	return st.Location()
}

// when writes a moment of the team's work in the study's zone:
// "3 Dec 2026 14:05 CST"; "" for none.
func when(t time.Time, loc *time.Location) string { return cohort.TimeLabel(t, loc) }

// whenPtr is when for an optional moment.
func whenPtr(t *time.Time, loc *time.Location) string {
	if t == nil {
		return ""
	}
	return when(*t, loc)
}

// dayOf writes the day a moment falls on in loc: "3 Dec 2026".
func dayOf(t time.Time, loc *time.Location) string {
	if t.IsZero() {
		return ""
	}
	return cohort.DateOf(t.In(loc)).Label()
}

// participantTime writes a moment in the participant's own zone, saying
// whose time it is: "3 Dec 2026 08:05 MST, the participant's time".
func participantTime(t time.Time, loc *time.Location) string {
	if t.IsZero() {
		return ""
	}
	return cohort.TimeLabel(t, loc) + ", the participant's time"
}
