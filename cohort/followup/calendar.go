package followup

import (
	"fmt"
	"time"

	"cohortdesk/cohort"
)

// Calendar is the study's working-day calendar: its time zone, its holidays
// and which weekdays are not worked. Deadlines are counted in the study's
// zone, not the server's, so a flag raised late on a Thursday evening in the
// study's zone counts from Thursday even when the server's clock already says
// Friday.
type Calendar struct {
	Location *time.Location // the study's time zone; nil means UTC
	Holidays []cohort.Date  // days not worked, in the study's zone
	Weekend  [7]bool        // indexed by time.Weekday; true for days not worked
}

// NewCalendar returns a calendar with Saturday and Sunday as the weekend, the
// most common working week (common practice; studies elsewhere set Weekend).
func NewCalendar(loc *time.Location, holidays ...cohort.Date) Calendar {
	var w [7]bool
	w[time.Saturday], w[time.Sunday] = true, true
	return Calendar{Location: loc, Holidays: holidays, Weekend: w}
}

// Validate reports a calendar that could never yield a deadline (no working
// weekday) or that lists impossible holiday dates.
func (c Calendar) Validate() error {
	var ve cohort.ValidationError
	if !c.hasWorkingWeekday() {
		ve.Add("weekend", "every day of the week is marked as weekend; at least one must be a working day")
	}
	for i, h := range c.Holidays {
		if !validDate(h) {
			ve.Add(fmt.Sprintf("holidays[%d]", i), fmt.Sprintf("%s is not a calendar date", h))
		}
	}
	return ve.Err()
}

// validDate reports whether d names a real day (not 2026-02-30 nor the zero date).
func validDate(d cohort.Date) bool {
	if d.Month < time.January || d.Month > time.December || d.Day < 1 {
		return false
	}
	return cohort.DateOf(time.Date(d.Year, d.Month, d.Day, 12, 0, 0, 0, time.UTC)) == d
}

func (c Calendar) hasWorkingWeekday() bool {
	for _, off := range c.Weekend {
		if !off {
			return true
		}
	}
	return false
}

func (c Calendar) loc() *time.Location {
	if c.Location == nil {
		return time.UTC
	}
	return c.Location
}

// DateOf is the calendar day of the instant t in the study's zone.
func (c Calendar) DateOf(t time.Time) cohort.Date { return cohort.DateOf(t.In(c.loc())) }

// weekday of a date; noon UTC is safe from any zone's midnight quirks.
func weekday(d cohort.Date) time.Weekday {
	return time.Date(d.Year, d.Month, d.Day, 12, 0, 0, 0, time.UTC).Weekday()
}

// holidaySet indexes the holidays once for the loops below.
func (c Calendar) holidaySet() map[cohort.Date]bool {
	s := make(map[cohort.Date]bool, len(c.Holidays))
	for _, h := range c.Holidays {
		s[h] = true
	}
	return s
}

func (c Calendar) working(d cohort.Date, holidays map[cohort.Date]bool) bool {
	return !c.Weekend[weekday(d)] && !holidays[d]
}

// IsWorkingDay reports whether d is neither a weekend day nor a holiday.
func (c Calendar) IsWorkingDay(d cohort.Date) bool {
	if c.Weekend[weekday(d)] {
		return false
	}
	for _, h := range c.Holidays {
		if h == d {
			return false
		}
	}
	return true
}

// AddWorkingDays gives the deadline "within n working days of from".
//
// Counting follows the usual way of counting periods in days: the day of the
// event (from's day in the study's zone) is not counted, and the deadline falls
// at the end of the n-th working day after it. A flag raised on Monday with
// n = 1 is due by the end of Tuesday; one raised on Saturday or Sunday with
// n = 1 is due by the end of Monday. n = 0 means "the same day", moved to the
// next working day when the event falls on a day off. Negative n is treated as
// 0.
//
// The deadline is returned as the first instant after the due day, local
// midnight of the following day, so a case is overdue exactly when
// now >= due, with no 23:59:59.999 rounding edge. Use DueDay to show the due
// day itself. Because the day is found first and midnight computed last, a
// daylight-saving change in between shortens or lengthens the wait by an hour
// instead of shifting the deadline off midnight.
//
// A calendar without any working weekday has no deadlines; it gives the zero
// time (Validate reports such a calendar).
func (c Calendar) AddWorkingDays(from time.Time, n int) time.Time {
	if !c.hasWorkingWeekday() {
		return time.Time{}
	}
	hol := c.holidaySet()
	d := c.DateOf(from)
	if n <= 0 {
		for !c.working(d, hol) {
			d = d.AddDays(1)
		}
	} else {
		for k := 0; k < n; {
			d = d.AddDays(1)
			if c.working(d, hol) {
				k++
			}
		}
	}
	return c.endOf(d)
}

// afterDays gives the deadline "within days calendar days of from": the day
// reached by counting calendar days, moved forward to a working day because
// someone on staff must act on it, with the deadline at the end of that day.
func (c Calendar) afterDays(from time.Time, days int) time.Time {
	if !c.hasWorkingWeekday() {
		return time.Time{}
	}
	hol := c.holidaySet()
	d := c.DateOf(from).AddDays(max(days, 0))
	for !c.working(d, hol) {
		d = d.AddDays(1)
	}
	return c.endOf(d)
}

// endOf is the first instant after day d in the study's zone.
func (c Calendar) endOf(d cohort.Date) time.Time { return d.AddDays(1).In(c.loc()) }

// DueDay is the last day a deadline from AddWorkingDays allows, for display:
// the day before the deadline instant, in the study's zone.
func (c Calendar) DueDay(due time.Time) cohort.Date { return c.DateOf(due.Add(-time.Nanosecond)) }

// WorkingDaysBetween counts the working days d with from < d <= to, the same
// counting as AddWorkingDays, so the deadline's day lies exactly n working
// days after the event's day. When to is before from the count is negative:
// WorkingDaysBetween(a, b) == -WorkingDaysBetween(b, a).
func (c Calendar) WorkingDaysBetween(from, to cohort.Date) int {
	if to.Before(from) {
		return -c.WorkingDaysBetween(to, from)
	}
	hol := c.holidaySet()
	n := 0
	for d := from.AddDays(1); !to.Before(d); d = d.AddDays(1) {
		if c.working(d, hol) {
			n++
		}
	}
	return n
}
