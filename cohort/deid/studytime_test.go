package deid

import (
	"testing"
	"time"
	_ "time/tzdata" // the tests must not depend on the host's zone files

	"cohortdesk/cohort"
)

func mustLoad(tb testing.TB, name string) *time.Location {
	tb.Helper()
	loc, err := time.LoadLocation(name)
	if err != nil {
		tb.Fatal(err)
	}
	return loc
}

// Study day counts calendar days in the participant's zone; elapsed hours
// divided by 24 would be off by one across daylight-saving changes. Dates
// are the 2025 US changes (second Sunday of March, first Sunday of November:
// 9 March and 2 November; common knowledge of the US rule, from memory) and
// the EU ones (last Sundays of March and October: 30 March, 26 October).
// The elapsed hours in each comment are hand-worked.
func TestStudyTimeAcrossDST(t *testing.T) {
	ny := mustLoad(t, "America/New_York")
	ldn := mustLoad(t, "Europe/London")
	tests := []struct {
		name     string
		enrolled string
		loc      *time.Location
		at       time.Time
		day      int
		week     int
	}{
		// 47.5 h after enrolment midnight (one 23-hour day): day 2, not 1.
		{"spring forward", "2025-03-08", ny, time.Date(2025, 3, 10, 0, 30, 0, 0, ny), 2, 0},
		{"spring forward, late evening", "2025-03-08", ny, time.Date(2025, 3, 9, 23, 30, 0, 0, ny), 1, 0},
		// 48.5 h after enrolment midnight (one 25-hour day): day 1, not 2.
		{"fall back", "2025-11-01", ny, time.Date(2025, 11, 2, 23, 30, 0, 0, ny), 1, 0},
		// Week 1 starts at local midnight of day 7, though 7*24 h have not
		// yet passed (167 hours across the change).
		{"week edge spring", "2025-03-03", ny, time.Date(2025, 3, 10, 0, 0, 0, 0, ny), 7, 1},
		{"week edge spring, a minute before", "2025-03-03", ny, time.Date(2025, 3, 9, 23, 59, 0, 0, ny), 6, 0},
		{"week edge autumn", "2025-10-20", ldn, time.Date(2025, 10, 27, 0, 0, 0, 0, ldn), 7, 1},
		{"EU spring", "2025-03-29", ldn, time.Date(2025, 3, 31, 0, 10, 0, 0, ldn), 2, 0},
		// The same instant seen from UTC is still counted in the participant's zone.
		{"instant given in UTC", "2025-03-08", ny, time.Date(2025, 3, 10, 4, 30, 0, 0, time.UTC), 2, 0},
		{"before enrolment", "2025-03-08", ny, time.Date(2025, 3, 7, 12, 0, 0, 0, ny), -1, -1},
		{"a week before", "2025-03-08", ny, time.Date(2025, 3, 1, 12, 0, 0, 0, ny), -7, -1},
		{"eight days before", "2025-03-08", ny, time.Date(2025, 2, 28, 12, 0, 0, 0, ny), -8, -2},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			enrolled := mustDate(t, tt.enrolled)
			got := StudyTimeAt(enrolled, tt.loc, tt.at)
			if got.Day != tt.day || got.Week != tt.week {
				t.Errorf("StudyTimeAt = %+v, want day %d week %d", got, tt.day, tt.week)
			}
			if w := cohort.StudyWeek(enrolled, tt.loc, tt.at); w != got.Week {
				t.Errorf("week %d disagrees with cohort.StudyWeek %d", got.Week, w)
			}
		})
	}
	// The 23-hour day really is 23 hours: the test above would be vacuous
	// if the zone had no change.
	if h := time.Date(2025, 3, 10, 0, 0, 0, 0, ny).Sub(time.Date(2025, 3, 9, 0, 0, 0, 0, ny)).Hours(); h != 23 {
		t.Fatalf("9 March 2025 in New York has %v hours, want 23", h)
	}
}

func TestStudyTimeOf(t *testing.T) {
	enrolled := mustDate(t, "2024-12-30")
	tests := []struct {
		date      string
		day, week int
	}{
		{"2024-12-30", 0, 0}, {"2025-01-05", 6, 0}, {"2025-01-06", 7, 1},
		{"2025-03-31", 91, 13}, {"2024-12-29", -1, -1}, {"2024-12-23", -7, -1},
	}
	for _, tt := range tests {
		got := StudyTimeOf(enrolled, mustDate(t, tt.date))
		if got.Day != tt.day || got.Week != tt.week {
			t.Errorf("StudyTimeOf(%s) = %+v, want day %d week %d", tt.date, got, tt.day, tt.week)
		}
	}
}

// Recruitment weeks are calendar weeks (Monday to Sunday) counted from the
// week of the study's first enrolment: a first enrolment on Wednesday 7
// January 2026 makes Monday 5 January the start of week 0; Sunday 11 January
// is still week 0 and Monday 12 January starts week 1 (dates checked
// against a proleptic Gregorian calendar: 1 January 2026 is a Thursday).
func TestRecruitmentWeek(t *testing.T) {
	first := cohort.Date{Year: 2026, Month: 1, Day: 7}
	for _, tt := range []struct {
		day  cohort.Date
		want int
	}{
		{cohort.Date{Year: 2026, Month: 1, Day: 7}, 0},
		{cohort.Date{Year: 2026, Month: 1, Day: 5}, 0},
		{cohort.Date{Year: 2026, Month: 1, Day: 11}, 0},
		{cohort.Date{Year: 2026, Month: 1, Day: 12}, 1},
		{cohort.Date{Year: 2026, Month: 3, Day: 30}, 12},
		{cohort.Date{Year: 2026, Month: 3, Day: 29}, 11},
	} {
		if got := RecruitmentWeek(first, tt.day); got != tt.want {
			t.Errorf("%s: recruitment week %d, want %d", tt.day, got, tt.want)
		}
	}
}
