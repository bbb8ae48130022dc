package web

import (
	"fmt"
	"math"
	"net/http"
	"strconv"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/deid"

	"github.com/go-echarts/go-echarts/v2/opts"
)

// disclosure words what one request may show of a participant's calendar
// dates and of the free text staff write about participants, by the one rule
// cohort.Role.SeesDatesAndFreeText. Roles that see them get dates and text;
// the others (monitors) get study time counted from the participant's own
// enrolment day (deid.StudyTime), the enrolment as a recruitment week counted
// from the study's first enrolment, chart axes in study days and no free
// text. Every page, fragment, chart and CSV that shows a participant-level
// date, reading time or staff text words it through these helpers.
type disclosure struct {
	dates bool // the role sees calendar dates and free text
}

// disclosureOf is the request's disclosure, from the signed-in role.
func disclosureOf(r *http.Request) disclosure {
	return disclosure{dates: role(r).SeesDatesAndFreeText()}
}

// day words a calendar day of a participant enrolled on enrolled: the date
// in the date style (cohort.Date.Label), or "study day N".
func (d disclosure) day(enrolled, day cohort.Date) string {
	if d.dates {
		return day.Label()
	}
	return "study day " + strconv.Itoa(deid.StudyTimeOf(enrolled, day).Day)
}

// dayAt words the day of moment t in the participant's time zone loc.
func (d disclosure) dayAt(enrolled cohort.Date, loc *time.Location, t time.Time) string {
	return d.day(enrolled, cohort.DateOf(t.In(loc)))
}

// enrolment words an enrolment day: the date, or the recruitment week
// counted from the study's first enrolment (first).
func (d disclosure) enrolment(first, enrolled cohort.Date) string {
	if d.dates {
		return enrolled.Label()
	}
	return "recruitment week " + strconv.Itoa(deid.RecruitmentWeek(first, enrolled))
}

// calendarWeek labels a calendar week of the study's weekly counts by its
// Monday: the date, or its recruitment week counted from the week of the
// study's first enrolment (first), the numbering enrolments get.
func (d disclosure) calendarWeek(first, monday cohort.Date) string {
	if d.dates {
		return monday.Label()
	}
	return "recruitment week " + strconv.Itoa(deid.RecruitmentWeek(first, monday))
}

// weekKey names a calendar week in page ids (test ids, anchors): its Monday
// as YYYY-MM-DD, or, for roles that see no dates, its recruitment week.
func (d disclosure) weekKey(first, monday cohort.Date) string {
	if d.dates {
		return monday.String()
	}
	return d.calendarWeek(first, monday)
}

// weekSpan words the days of study week n in the participant's zone loc:
// "4 Mar – 10 Mar 2026" (cohort.DateRangeLabel), or "days 28–34".
func (d disclosure) weekSpan(enrolled cohort.Date, loc *time.Location, n int) string {
	if d.dates {
		start, end := cohort.WeekBounds(enrolled, loc, n)
		return cohort.DateRangeLabel(cohort.DateOf(start), cohort.DateOf(end.AddDate(0, 0, -1)))
	}
	return fmt.Sprintf("days %d–%d", 7*n, 7*n+6)
}

// text is staff free text, or "" for a role that does not see it.
func (d disclosure) text(s string) string {
	if d.dates {
		return s
	}
	return ""
}

// timeAxis is the time axis of a chart of one participant-week that starts
// at weekStart (Unix ms) and ends at weekEnd: for roles that see dates a
// calendar time axis in the participant's own time (loc): each instant at
// its wall-clock time there, in milliseconds the chart must read as UTC
// (wallClock), the axis named for the zone; for the others a value axis of
// study days (week n's start is day 7n), so the chart's data holds no
// timestamp. x maps a reading's Unix ms to the axis.
func (d disclosure) timeAxis(n int, weekStart, weekEnd int64, loc *time.Location) (x func(ms int64) any, axis opts.XAxis) {
	if d.dates {
		wall := func(ms int64) int64 {
			_, off := time.UnixMilli(ms).In(loc).Zone()
			return ms + int64(off)*1000
		}
		return func(ms int64) any { return wall(ms) }, opts.XAxis{Type: "time", Min: wall(weekStart), Max: wall(weekEnd),
			Name: "participant's time (" + loc.String() + ")", NameLocation: "middle", NameGap: 26}
	}
	days := func(ms int64) float64 {
		v := float64(7*n) + float64(ms-weekStart)/float64(24*time.Hour/time.Millisecond)
		return math.Round(v*1e4) / 1e4 // about 9 s: finer than any reading interval drawn
	}
	return func(ms int64) any { return days(ms) },
		opts.XAxis{Type: "value", Name: "study day", Min: days(weekStart), Max: days(weekEnd)}
}
