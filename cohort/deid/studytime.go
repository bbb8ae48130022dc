package deid

import (
	"time"

	"cohortdesk/cohort"
)

// StudyTime replaces a date in an export: the day and week counted from the
// participant's enrolment day (day 0, week 0). Safe Harbor removes every
// element of a date but the year; counting from a day that is itself not
// exported keeps the intervals a reader needs without the dates.
type StudyTime struct {
	Day  int // calendar days since the enrolment day; negative before it
	Week int // study week: week N covers days [7N, 7N+7)
}

// StudyTimeAt converts a moment to study time, counting calendar days in the
// participant's time zone, so a day that is 23 or 25 hours long across a
// daylight-saving change still counts as one day.
func StudyTimeAt(enrolled cohort.Date, loc *time.Location, t time.Time) StudyTime {
	return fromDays(cohort.StudyDay(enrolled, loc, t))
}

// StudyTimeOf converts a calendar date (an over-read date, a shipping date)
// to study time.
func StudyTimeOf(enrolled, d cohort.Date) StudyTime {
	return fromDays(d.DaysSince(enrolled))
}

func fromDays(day int) StudyTime {
	w := day / 7
	if day < 0 && day%7 != 0 {
		w-- // floor, so day -1 is in week -1 as cohort.StudyWeek has it
	}
	return StudyTime{Day: day, Week: w}
}

// RecruitmentWeek is the calendar week (Monday to Sunday, ISO 8601) of the
// study's recruitment in which day falls, counted from the week of the
// study's first enrolment day (week 0): the period that stands for an
// enrolment date, and labels the study's weekly counts, where dates are not
// shown. Participants and weekly counts share the numbering, so a
// participant enrolled in recruitment week 12 is counted in week 12.
func RecruitmentWeek(first, day cohort.Date) int {
	return StudyTimeOf(first.Monday(), day.Monday()).Week
}
