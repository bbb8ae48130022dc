package enrolment

import (
	"cohortdesk/cohort"
	"cohortdesk/cohort/stats"
)

// TrailingWeeks is how many seven-day periods SiteHistory.Trailing holds:
// the longest history a projection may use.
const TrailingWeeks = 52

// Site is a recruiting site as the history counts it.
type Site struct {
	ID     int
	Code   string
	Name   string
	Target int
}

// Enrolled is one participant as the history counts them: their site, the
// day they enrolled and whether they had withdrawn by the history's day. N
// makes it stand for N such participants (a kept count by site and day);
// zero counts as one.
type Enrolled struct {
	Site      int
	On        cohort.Date
	Withdrawn bool
	N         int
}

// SiteHistory is one site's enrolment history as of a day: counts per
// calendar week (weeks start on Monday) from the study's first enrolment week
// to the week holding that day, for the chart, and counts in the seven-day
// periods that end on that day, for the projection.
type SiteHistory struct {
	Site
	Enrolled  int   // enrolled on or before the day
	Withdrawn int   // of those, withdrawn on or before the day
	Weekly    []int // enrolments per week, aligned with History.Weeks
	// Trailing holds the enrolments in each of the TrailingWeeks seven-day
	// periods before the day, oldest first; the last period is the six days
	// before the day and the day itself. A calendar week still under way is
	// not a whole week, so a recent rate is taken over these periods instead.
	Trailing []int
}

// History is every site's weekly enrolment on a common week axis.
type History struct {
	Weeks []cohort.Date // Monday of each week
	Sites []SiteHistory
	Today cohort.Date // the day the history runs to
	// Periods is how many of the Trailing periods reach back no further
	// than the study's first enrolment (at most TrailingWeeks; 0 before any
	// enrolment): a rate over older periods would count weeks before the
	// study began recruiting as weeks without enrolment.
	Periods int
}

// Tally counts the participants enrolled on or before today into every
// site's history, in the order of sites; later enrolments and participants
// of other sites are left out. The week axis runs from the Monday of the
// earliest enrolment (or of today) to the week holding today.
func Tally(today cohort.Date, sites []Site, people []Enrolled) History {
	h := History{Today: today}
	var earliest cohort.Date
	for _, p := range people {
		if !today.Before(p.On) && (earliest.IsZero() || p.On.Before(earliest)) {
			earliest = p.On
		}
	}
	first := today.Monday()
	if !earliest.IsZero() {
		if earliest.Monday().Before(first) {
			first = earliest.Monday()
		}
		h.Periods = min(TrailingWeeks, today.DaysSince(earliest)/7+1)
	}
	for d := first; !today.Before(d); d = d.AddDays(7) {
		h.Weeks = append(h.Weeks, d)
	}
	idx := map[int]int{}
	for i, st := range sites {
		idx[st.ID] = i
		h.Sites = append(h.Sites, SiteHistory{Site: st, Weekly: make([]int, len(h.Weeks)), Trailing: make([]int, TrailingWeeks)})
	}
	for _, p := range people {
		i, ok := idx[p.Site]
		if !ok || today.Before(p.On) {
			continue
		}
		se, n := &h.Sites[i], max(p.N, 1)
		se.Enrolled += n
		if p.Withdrawn {
			se.Withdrawn += n
		}
		if w := p.On.Monday().DaysSince(first) / 7; w >= 0 && w < len(se.Weekly) {
			se.Weekly[w] += n
		}
		// Days 0..6 before today fall in the last period, 7..13 in the one
		// before, and so on.
		if back := today.DaysSince(p.On) / 7; back >= 0 && back < TrailingWeeks {
			se.Trailing[TrailingWeeks-1-back] += n
		}
	}
	return h
}

// Figures is one site's (or the study's) enrolment against target with its
// projection: a row of the enrolment table.
type Figures struct {
	Site       Site // the site; for the study, zero but for the summed Target
	Enrolled   int
	Withdrawn  int
	Projection stats.Projection
	Projected  bool   // Projection holds a projection
	Why        string // why there is none
}

// ProjectionLevel is the confidence level of the projection's rate interval.
const ProjectionLevel = 0.95

// figures projects the date the target is reached from the enrolments in the
// last window seven-day periods up to the history's day (fewer when the study
// is younger than that).
func (h History) figures(site Site, enrolled, withdrawn int, trailing []int, window int) Figures {
	f := Figures{Site: site, Enrolled: enrolled, Withdrawn: withdrawn}
	window = min(window, h.Periods, len(trailing))
	switch {
	case site.Target == 0:
		f.Why = "no target set"
		return f
	case window <= 0:
		f.Why = "no enrolment yet"
		return f
	}
	p, err := stats.ProjectEnrolment(h.Today, enrolled, site.Target, trailing[len(trailing)-window:], ProjectionLevel)
	if err != nil {
		f.Why = "cannot project: " + err.Error()
		return f
	}
	f.Projection, f.Projected = p, true
	return f
}

// Project gives every site's figures, in the history's order, and the
// study's (the sites' counts and targets summed), each projected over the
// last window seven-day periods.
func (h History) Project(window int) ([]Figures, Figures) {
	var rows []Figures
	trailing := make([]int, TrailingWeeks)
	var enrolled, withdrawn, target int
	for _, se := range h.Sites {
		rows = append(rows, h.figures(se.Site, se.Enrolled, se.Withdrawn, se.Trailing, window))
		for i, c := range se.Trailing {
			trailing[i] += c
		}
		enrolled += se.Enrolled
		withdrawn += se.Withdrawn
		target += se.Target
	}
	return rows, h.figures(Site{Target: target}, enrolled, withdrawn, trailing, window)
}
