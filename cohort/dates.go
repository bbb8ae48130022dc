package cohort

import (
	"fmt"
	"strings"
	"time"
)

// How dates and times are written for people. One style everywhere a person
// reads them (pages, PDFs, messages); files for machines and form values keep
// ISO 8601 (Date.String, RFC 3339).
//
//   - A day is "3 Dec 2026" (Date.Label): the day, the month's short name, the
//     year, in that order whatever the reader's locale, so 3/12 and 12/3 are
//     never confused. Where staff plan work by the day (deadlines, "today"),
//     the weekday leads: "Thu 3 Dec 2026" (Date.DayLabel).
//   - A moment is its day and the 24-hour time with the zone's abbreviation:
//     "3 Dec 2026 14:05 CST" (TimeLabel). A time is never shown without the
//     zone it is read in.
//   - Whose zone: the study's zone for the team's work (deadlines, contact
//     attempts, notes, the audit trail, imports, exports, jobs); the
//     participant's own zone where their day matters (study weeks and their
//     days, the heart-rate chart, when a recording was taken), labelled as the
//     participant's time with the zone's name.
//   - A span of days is written once with a dash: "29 Apr – 5 May 2026"
//     (DateRangeLabel).
const (
	DateLayout = "2 Jan 2006"
	DayLayout  = "Mon 2 Jan 2006"
	TimeLayout = "2 Jan 2006 15:04 MST"
)

// Label writes the day in the one date style: "3 Dec 2026"; "" for no day.
func (d Date) Label() string {
	if d.IsZero() {
		return ""
	}
	return d.noon().Format(DateLayout)
}

// DayLabel writes the day with its weekday: "Thu 3 Dec 2026"; "" for no day.
func (d Date) DayLabel() string {
	if d.IsZero() {
		return ""
	}
	return d.noon().Format(DayLayout)
}

func (d Date) noon() time.Time { return time.Date(d.Year, d.Month, d.Day, 12, 0, 0, 0, time.UTC) }

// TimeLabel writes a moment as read in loc: "3 Dec 2026 14:05 CST"; "" for
// the zero time. A nil loc is UTC.
func TimeLabel(t time.Time, loc *time.Location) string {
	if t.IsZero() {
		return ""
	}
	if loc == nil {
		loc = time.UTC
	}
	return t.In(loc).Format(TimeLayout)
}

// ClockLabel writes the time of day of a moment as read in loc with the
// zone's abbreviation: "14:05 CST".
func ClockLabel(t time.Time, loc *time.Location) string {
	if loc == nil {
		loc = time.UTC
	}
	return t.In(loc).Format("15:04 MST")
}

// DateRangeLabel writes a span of days, both included: "29 Apr – 5 May 2026",
// "29 Dec 2026 – 4 Jan 2027", "3 Dec 2026" when both are one day.
func DateRangeLabel(from, to Date) string {
	switch {
	case from == to:
		return from.Label()
	case from.Year == to.Year:
		return from.noon().Format("2 Jan") + " – " + to.Label()
	}
	return from.Label() + " – " + to.Label()
}

// DayRangeLabel writes a span of days with their weekdays, both included:
// "Mon 23 Nov – Sun 29 Nov 2026"; the year is written once when both days
// fall in it.
func DayRangeLabel(from, to Date) string {
	if from.Year == to.Year {
		return from.noon().Format("Mon 2 Jan") + " – " + to.DayLabel()
	}
	return from.DayLabel() + " – " + to.DayLabel()
}

// ParseDay reads a day a person typed: ISO 8601 (2026-12-03) or the date
// style, with or without the weekday ("3 Dec 2026", "Thu 3 Dec 2026",
// "3 December 2026"). Files keep ParseDate's strict ISO form.
func ParseDay(s string) (Date, error) {
	s = strings.Join(strings.Fields(s), " ")
	if d, err := ParseDate(s); err == nil {
		return d, nil
	}
	for _, layout := range []string{DateLayout, DayLayout, "2 January 2006", "Monday 2 January 2006", "Mon 2 January 2006"} {
		if t, err := time.Parse(layout, s); err == nil {
			return DateOf(t), nil
		}
	}
	return Date{}, fmt.Errorf("date %q: write it as 3 Dec 2026 or 2026-12-03", s)
}
