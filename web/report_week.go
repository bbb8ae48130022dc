package web

import (
	"context"
	"strconv"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/deid"
	"cohortdesk/db"
	"cohortdesk/views"
)

// The weekly report's week: what the whole study did in the days reported
// (new flags, contacts, recordings, readings, referrals), beside the same
// figures so far. The cascade and the agreement figures stay cumulative, for
// the participants the report's enrolment choice keeps.

type activityStore interface {
	Activity(ctx context.Context, siteID int, from, to cohort.Date, loc *time.Location) (week, sofar db.Activity, err error)
}

// reportWeek is the span of days the report covers and what happened in it.
type reportWeek struct {
	from, to    cohort.Date // both included, days in the study's zone
	given       bool        // chosen in the query rather than the default
	dates       bool        // the reader sees dates (disclosure.dates)
	first       cohort.Date // the study's first enrolment, for recruitment weeks when not
	week, sofar db.Activity
}

// lastWeek is the calendar week (Monday to Sunday, ISO 8601) before the one
// holding today: the default week of the report, complete by Monday.
func lastWeek(today cohort.Date) (from, to cohort.Date) {
	from = today.Monday().AddDays(-7)
	return from, from.AddDays(6)
}

// readReportWeek reads the report's week (since, until: days, both
// included) with the report's other parameters, strictly; without them it is
// the last complete calendar week. A role that sees no dates (d) chooses it
// in recruitment weeks instead (week_from, week_to: counted from the week of
// the study's first enrolment, first), so no day of the calendar is asked
// for or shown back.
func readReportWeek(q *query, today cohort.Date, d disclosure, first cohort.Date) reportWeek {
	var w reportWeek
	w.dates, w.first = d.dates, first
	if !d.dates {
		a, okA := q.number("week_from", 0, maxRecruitmentWeek, "the first recruitment week")
		b, okB := q.number("week_to", 0, maxRecruitmentWeek, "the last recruitment week")
		switch {
		case okA && !okB:
			b = a
		case okB && !okA:
			a = b
		}
		if okA || okB {
			w.from, w.to, w.given = w.recruitmentMonday(a), w.recruitmentMonday(b).AddDays(6), true
		}
	}
	if !w.given {
		w.from, w.to = q.date("since"), q.date("until")
		w.given = !w.from.IsZero() || !w.to.IsZero()
	}
	def, defTo := lastWeek(today)
	switch {
	case w.from.IsZero() && w.to.IsZero():
		w.from, w.to = def, defTo
	case w.from.IsZero():
		w.from = w.to.AddDays(-6)
	case w.to.IsZero():
		w.to = w.from.AddDays(6)
	}
	if w.to.Before(w.from) {
		if d.dates {
			q.refuse("until", "the last day is before the first")
		} else {
			q.refuse("week_to", "the last week is before the first")
		}
	}
	return w
}

// maxRecruitmentWeek bounds the recruitment weeks a report may ask for
// (two hundred years of weeks: any study's).
const maxRecruitmentWeek = 10000

// recruitmentMonday is the Monday of recruitment week n.
func (w reportWeek) recruitmentMonday(n int) cohort.Date { return w.first.Monday().AddDays(7 * n) }

// recruitmentWeeks are the recruitment weeks of the week's first and last
// days.
func (w reportWeek) recruitmentWeeks() (from, to int) {
	return deid.RecruitmentWeek(w.first, w.from), deid.RecruitmentWeek(w.first, w.to)
}

// values are the week's choice for links, when it was chosen: days, or
// recruitment weeks for a role that sees no dates.
func (w reportWeek) values() []string {
	if !w.given {
		return nil
	}
	if !w.dates {
		a, b := w.recruitmentWeeks()
		return []string{"week_from", strconv.Itoa(a), "week_to", strconv.Itoa(b)}
	}
	return []string{"since", w.from.String(), "until", w.to.String()}
}

// label says which days the week covers: "Mon 23 Nov – Sun 29 Nov 2026";
// for a role that sees no dates, the recruitment weeks they fall in, counted
// from the week of the study's first enrolment (first).
func (w reportWeek) label(d disclosure, first cohort.Date) string {
	if d.dates {
		return cohort.DayRangeLabel(w.from, w.to)
	}
	a, b := d.calendarWeek(first, w.from.Monday()), d.calendarWeek(first, w.to.Monday())
	if a == b {
		return a
	}
	return a + " to " + b
}

// activityFigures are the rows of "the week": each figure's key, words and
// values in the week and so far.
func (w reportWeek) activityFigures() []views.ActivityRow {
	row := func(key, label string, in, total int) views.ActivityRow {
		return views.ActivityRow{Key: key, Label: label, Week: strconv.Itoa(in), SoFar: strconv.Itoa(total)}
	}
	a, s := w.week, w.sofar
	return []views.ActivityRow{
		row("flagged", "new flags (follow-up cases opened)", a.Flagged, s.Flagged),
		row("attempts", "contact attempts", a.Attempts, s.Attempts),
		row("reached", "of which reached the participant", a.Reached, s.Reached),
		row("recorders", "recorders sent", a.RecordersSent, s.RecordersSent),
		row("recordings", "ECG recordings received", a.Recordings, s.Recordings),
		row("over-reads", "over-reads entered (by the day read)", a.OverReads, s.OverReads),
		row("referred", "referral summaries signed off (cases referred)", a.SignedOff, s.SignedOff),
		row("ended", "cases ended (referred or closed)", a.Ended, s.Ended),
		row("enrolled", "participants enrolled", a.Enrolled, s.Enrolled),
		row("withdrawn", "participants withdrawn", a.Withdrawn, s.Withdrawn),
	}
}

// activityTable is "the week" as a CSV file of the report's bundle.
func (w reportWeek) activityTable() *csvTable {
	if !w.dates {
		t := newCSVTable("activity.csv", "figure", "label", "first_recruitment_week", "last_recruitment_week", "in_the_days", "so_far")
		a, b := w.recruitmentWeeks()
		for _, r := range w.activityFigures() {
			t.add(r.Key, r.Label, strconv.Itoa(a), strconv.Itoa(b), r.Week, r.SoFar)
		}
		return t
	}
	t := newCSVTable("activity.csv", "figure", "label", "first_day", "last_day", "in_the_days", "so_far")
	for _, r := range w.activityFigures() {
		t.add(r.Key, r.Label, w.from.String(), w.to.String(), r.Week, r.SoFar)
	}
	return t
}

// weekLinks are the ready-made weeks: the last complete one, this one so
// far, and the last four complete ones; each keeps the report's other
// choices (href builds the address from the week's values).
func weekLinks(w reportWeek, today cohort.Date, href func(week []string) string) []views.PaperLink {
	from, to := lastWeek(today)
	span := func(a, b cohort.Date) []string {
		if !w.dates {
			return []string{"week_from", strconv.Itoa(deid.RecruitmentWeek(w.first, a)), "week_to", strconv.Itoa(deid.RecruitmentWeek(w.first, b))}
		}
		return []string{"since", a.String(), "until", b.String()}
	}
	return []views.PaperLink{
		{Label: "last week", Href: href(span(from, to))},
		{Label: "this week so far", Href: href(span(today.Monday(), today))},
		{Label: "the last 4 weeks", Href: href(span(from.AddDays(-21), to))},
	}
}
