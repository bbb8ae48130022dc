package enrolment

import (
	"slices"
	"testing"

	"cohortdesk/cohort"
)

// historyFixture: today is Wednesday 18 March 2026. Site A (target 100) has
// six enrolments on or before today (one withdrawn) and one after it; site B
// (no target) one; site C (target 50) none; a participant of an unknown site
// is left out. The counts below are worked by hand from the calendar
// (computed): weeks start on Monday 23 February, 2, 9 and 16 March; a
// seven-day period ends on today, so 12 March (6 days back) is in the last
// period and 11 March (7 days back) in the one before.
func historyFixture() History {
	today := day(2026, 3, 18)
	sites := []Site{{ID: 1, Code: "A", Name: "Site A", Target: 100}, {ID: 2, Code: "B", Name: "Site B"}, {ID: 3, Code: "C", Name: "Site C", Target: 50}}
	people := []Enrolled{
		{Site: 1, On: day(2026, 3, 18)}, {Site: 1, On: day(2026, 3, 19)}, {Site: 1, On: day(2026, 3, 12)}, {Site: 1, On: day(2026, 3, 11)},
		{Site: 1, On: day(2026, 3, 2), Withdrawn: true}, {Site: 1, On: day(2026, 3, 1)}, {Site: 1, On: day(2026, 2, 23)},
		{Site: 2, On: day(2026, 3, 5)}, {Site: 9, On: day(2026, 3, 10)},
	}
	return Tally(today, sites, people)
}

func TestTally(t *testing.T) {
	h := historyFixture()
	if want := []cohort.Date{day(2026, 2, 23), day(2026, 3, 2), day(2026, 3, 9), day(2026, 3, 16)}; !slices.Equal(h.Weeks, want) {
		t.Errorf("weeks %v, want %v", h.Weeks, want)
	}
	if h.Periods != 4 {
		t.Errorf("periods %d, want 4 (23 days since the first enrolment)", h.Periods)
	}
	a, b, c := h.Sites[0], h.Sites[1], h.Sites[2]
	if a.Code != "A" || a.Enrolled != 6 || a.Withdrawn != 1 || !slices.Equal(a.Weekly, []int{2, 1, 2, 1}) {
		t.Errorf("site A: %d enrolled, %d withdrawn, weekly %v; want 6, 1, [2 1 2 1]", a.Enrolled, a.Withdrawn, a.Weekly)
	}
	if got := a.Trailing[TrailingWeeks-4:]; !slices.Equal(got, []int{1, 2, 1, 2}) {
		t.Errorf("site A's last four periods %v, want [1 2 1 2]", got)
	}
	if b.Enrolled != 1 || !slices.Equal(b.Weekly, []int{0, 1, 0, 0}) || b.Trailing[TrailingWeeks-2] != 1 {
		t.Errorf("site B: %d enrolled, weekly %v, trailing %v", b.Enrolled, b.Weekly, b.Trailing[TrailingWeeks-4:])
	}
	if c.Enrolled != 0 || len(c.Weekly) != 4 || len(c.Trailing) != TrailingWeeks {
		t.Errorf("site C: %+v", c)
	}
	sum := 0
	for _, n := range a.Trailing {
		sum += n
	}
	if sum != a.Enrolled {
		t.Errorf("site A's periods hold %d enrolments, want all %d", sum, a.Enrolled)
	}

	empty := Tally(day(2026, 3, 18), []Site{{ID: 1, Target: 10}}, nil)
	if empty.Periods != 0 || !slices.Equal(empty.Weeks, []cohort.Date{day(2026, 3, 16)}) {
		t.Errorf("no enrolment: periods %d, weeks %v; want 0 and the current week", empty.Periods, empty.Weeks)
	}
}

// TestProject: the window is clamped to the study's age; the expected date
// is ceil(remaining x window / count) weeks on (stats.ProjectEnrolment's
// rounding; the weeks here are worked by hand, computed).
func TestProject(t *testing.T) {
	h := historyFixture()
	rows, total := h.Project(8)
	if len(rows) != 3 {
		t.Fatalf("%d rows, want 3", len(rows))
	}
	a, b, c := rows[0], rows[1], rows[2]
	// A: 6 in the 4 periods since the first enrolment, 94 to go: 63 weeks.
	if !a.Projected || a.Projection.Window != 4 || a.Projection.Count != 6 || a.Projection.Expected.Weeks != 63 ||
		a.Projection.Expected.Date != day(2027, 6, 2) || a.Site.Code != "A" {
		t.Errorf("site A: %+v", a)
	}
	if b.Projected || b.Why != "no target set" || b.Enrolled != 1 {
		t.Errorf("site B: %+v, want no projection without a target", b)
	}
	if !c.Projected || c.Projection.Expected.Reachable || c.Projection.Count != 0 {
		t.Errorf("site C: %+v, want a projection that cannot be reached", c)
	}
	// All sites: target 150, 7 enrolled (1 withdrawn), 7 in the window, 143
	// to go: 82 weeks.
	if total.Site.Target != 150 || total.Enrolled != 7 || total.Withdrawn != 1 || !total.Projected ||
		total.Projection.Count != 7 || total.Projection.Expected.Weeks != 82 || total.Projection.Expected.Date != day(2027, 10, 13) {
		t.Errorf("total: %+v", total)
	}
	// A window of 2 takes the last two periods: 3 enrolments, 63 weeks.
	rows, _ = h.Project(2)
	if p := rows[0].Projection; p.Window != 2 || p.Count != 3 || p.Expected.Weeks != 63 {
		t.Errorf("site A over 2 periods: window %d, count %d, %d weeks", p.Window, p.Count, p.Expected.Weeks)
	}
	_, none := Tally(day(2026, 3, 18), []Site{{ID: 1, Target: 10}}, nil).Project(8)
	if none.Projected || none.Why != "no enrolment yet" {
		t.Errorf("before any enrolment: %+v", none)
	}
}
