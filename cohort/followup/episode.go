package followup

import (
	"cmp"
	"fmt"
	"slices"
)

// PositiveWeek is one screen-positive participant-week.
type PositiveWeek struct {
	Week int    // study week number, 0-based, as cohort.StudyWeek counts it
	Key  string // stable identity of the result behind the week (for example its row id), so re-running the merge never duplicates a week
}

// Episode is a run of positive weeks of one participant close enough together
// to be followed up as one case.
type Episode struct {
	First int            // earliest week of the episode
	Last  int            // latest week of the episode
	Weeks []PositiveWeek // sorted by week, then key
}

// Episodes merges the positive weeks of one participant into episodes.
//
// The rule: two positive weeks a < b belong to the same episode when
// b - a <= gap, and the relation is chained, so an episode is a maximal run in
// which each positive week lies at most gap weeks after the previous one. With
// gap 1 only back-to-back weeks merge (the domain's "consecutive positive
// weeks"). With gap 2, weeks 3 and 5 merge (one negative or missing week
// between them) while weeks 3 and 7 do not. The week between two positives may
// be negative, insufficient or absent: only the positives count.
//
// Input order does not matter. Two results for the same week number (say, from
// two algorithms) both stay in the episode. gap must be at least 1; weeks must
// not be negative; keys must be non-empty and unique.
func Episodes(weeks []PositiveWeek, gap int) ([]Episode, error) {
	if gap < 1 {
		return nil, fmt.Errorf("followup: episode gap %d: want 1 or more", gap)
	}
	if err := checkWeeks(weeks, "weeks"); err != nil {
		return nil, err
	}
	return mergeSorted(sortedWeeks(weeks), gap), nil
}

// checkWeeks rejects weeks that would make the merge ambiguous. where names the
// input in the message.
func checkWeeks(weeks []PositiveWeek, where string) error {
	seen := make(map[string]int, len(weeks))
	for i, w := range weeks {
		switch {
		case w.Key == "":
			return fmt.Errorf("followup: %s[%d] (week %d): empty key", where, i, w.Week)
		case w.Week < 0:
			return fmt.Errorf("followup: %s[%d] (key %q): negative week %d", where, i, w.Key, w.Week)
		}
		if j, dup := seen[w.Key]; dup {
			return fmt.Errorf("followup: %s[%d]: key %q already used by %s[%d]", where, i, w.Key, where, j)
		}
		seen[w.Key] = i
	}
	return nil
}

// sortedWeeks returns a copy ordered by week, then key, so every output is
// deterministic whatever order the store returned rows in.
func sortedWeeks(weeks []PositiveWeek) []PositiveWeek {
	s := slices.Clone(weeks)
	slices.SortFunc(s, comparePositiveWeeks)
	return s
}

func comparePositiveWeeks(a, b PositiveWeek) int {
	if c := cmp.Compare(a.Week, b.Week); c != 0 {
		return c
	}
	return cmp.Compare(a.Key, b.Key)
}

// mergeSorted cuts sorted weeks wherever the step to the next week exceeds gap.
func mergeSorted(sorted []PositiveWeek, gap int) []Episode {
	var out []Episode
	for i, w := range sorted {
		if i == 0 || w.Week-sorted[i-1].Week > gap {
			out = append(out, Episode{First: w.Week, Last: w.Week})
		}
		e := &out[len(out)-1]
		e.Last = w.Week
		e.Weeks = append(e.Weeks, w)
	}
	return out
}

// CaseWeeks is an existing case of the participant as AssignToCases needs it.
type CaseWeeks struct {
	ID    string
	State State
	Weeks []PositiveWeek // the weeks already attached to the case; at least one
}

// Addition is a set of new weeks to attach to one existing case.
type Addition struct {
	CaseID string
	Weeks  []PositiveWeek // sorted by week, then key
}

// Assignment says what to do with newly screened positive weeks.
type Assignment struct {
	Extend []Addition     // weeks that join a case still being worked, by case id
	Late   []Addition     // weeks recorded on a final case without reopening it, by case id
	New    []Episode      // each needs a new case, by first week
	Known  []PositiveWeek // keys already on a case: nothing to do (re-runs are harmless)
}

// AssignToCases decides, for one participant, which new positive weeks extend
// an existing case and which open new cases. gap is the protocol's episode gap
// (see Episodes).
//
// The new weeks are first merged among themselves into runs with the gap rule.
// A week lies within reach of a case when its distance to the case's span
// [first week, last week] is at most gap (distance 0 inside the span, so late
// uploads of earlier weeks count too). Then, run by run:
//
//  1. A run with any week within reach of a case that is not final extends
//     that case. When it reaches more than one such case, each week goes to the
//     nearest of them (ties: earlier first week, then smaller id); two cases
//     are never merged, because that is a decision for a person.
//  2. Otherwise, a run whose every week is within reach of a final case is
//     recorded on the nearest final case as late weeks; the case stays closed,
//     since the episode it was about has already been dealt with.
//  3. Otherwise the run opens a new case. In particular a positive run that
//     starts within the gap of a closed case but goes beyond it opens a new
//     case holding the whole run: the episode continued after the closing.
//     A final case's span never grows, so a long run after closing cannot be
//     swallowed by it.
//
// Weeks whose key is already on a case are returned as Known. A key that is on
// a case under a different week number is an error, as are duplicate case ids
// or keys, unknown states and cases without weeks.
func AssignToCases(cases []CaseWeeks, weeks []PositiveWeek, gap int) (Assignment, error) {
	if gap < 1 {
		return Assignment{}, fmt.Errorf("followup: episode gap %d: want 1 or more", gap)
	}
	if err := checkWeeks(weeks, "weeks"); err != nil {
		return Assignment{}, err
	}
	type span struct {
		id          string
		first, last int
		final       bool
	}
	spans := make([]span, 0, len(cases))
	owner := map[string]PositiveWeek{} // key -> week on a case
	ids := map[string]bool{}
	for i, c := range cases {
		switch {
		case c.ID == "":
			return Assignment{}, fmt.Errorf("followup: cases[%d]: empty case id", i)
		case ids[c.ID]:
			return Assignment{}, fmt.Errorf("followup: cases[%d]: case id %q appears twice", i, c.ID)
		case !c.State.Valid():
			return Assignment{}, fmt.Errorf("followup: case %q: unknown state %q", c.ID, string(c.State))
		case len(c.Weeks) == 0:
			return Assignment{}, fmt.Errorf("followup: case %q: no weeks", c.ID)
		}
		ids[c.ID] = true
		if err := checkWeeks(c.Weeks, "case "+c.ID+" weeks"); err != nil {
			return Assignment{}, err
		}
		s := span{id: c.ID, first: c.Weeks[0].Week, last: c.Weeks[0].Week, final: c.State.Terminal()}
		for _, w := range c.Weeks {
			if _, dup := owner[w.Key]; dup {
				return Assignment{}, fmt.Errorf("followup: case %q: key %q is on another case too", c.ID, w.Key)
			}
			owner[w.Key] = w
			s.first = min(s.first, w.Week)
			s.last = max(s.last, w.Week)
		}
		spans = append(spans, s)
	}

	var out Assignment
	var fresh []PositiveWeek
	for i, w := range weeks {
		if on, ok := owner[w.Key]; ok {
			if on.Week != w.Week {
				return Assignment{}, fmt.Errorf("followup: weeks[%d]: key %q is week %d on a case but week %d here", i, w.Key, on.Week, w.Week)
			}
			out.Known = append(out.Known, w)
			continue
		}
		fresh = append(fresh, w)
	}
	slices.SortFunc(out.Known, comparePositiveWeeks)

	dist := func(w int, s span) int {
		switch {
		case w < s.first:
			return s.first - w
		case w > s.last:
			return w - s.last
		}
		return 0
	}
	// nearest picks, among the spans allowed by use, the one closest to w.
	nearest := func(w int, use func(span) bool) (span, bool) {
		var best span
		found := false
		for _, s := range spans {
			if !use(s) {
				continue
			}
			if !found || dist(w, s) < dist(w, best) ||
				dist(w, s) == dist(w, best) && (s.first < best.first || s.first == best.first && s.id < best.id) {
				best, found = s, true
			}
		}
		return best, found
	}

	extend := map[string][]PositiveWeek{}
	late := map[string][]PositiveWeek{}
	for _, run := range mergeSorted(sortedWeeks(fresh), gap) {
		touched := map[string]bool{}
		for _, w := range run.Weeks {
			for _, s := range spans {
				if !s.final && dist(w.Week, s) <= gap {
					touched[s.id] = true
				}
			}
		}
		if len(touched) > 0 {
			for _, w := range run.Weeks {
				s, _ := nearest(w.Week, func(s span) bool { return touched[s.id] })
				extend[s.id] = append(extend[s.id], w)
			}
			continue
		}
		allNear := true
		for _, w := range run.Weeks {
			if _, ok := nearest(w.Week, func(s span) bool { return s.final && dist(w.Week, s) <= gap }); !ok {
				allNear = false
				break
			}
		}
		if allNear {
			for _, w := range run.Weeks {
				s, _ := nearest(w.Week, func(s span) bool { return s.final && dist(w.Week, s) <= gap })
				late[s.id] = append(late[s.id], w)
			}
			continue
		}
		out.New = append(out.New, run)
	}
	out.Extend = additions(extend)
	out.Late = additions(late)
	return out, nil
}

// additions turns a case-id map into a slice ordered by case id, so the store
// touches cases in a fixed order (which also avoids lock-order deadlocks).
func additions(m map[string][]PositiveWeek) []Addition {
	if len(m) == 0 {
		return nil
	}
	out := make([]Addition, 0, len(m))
	for id, ws := range m {
		slices.SortFunc(ws, comparePositiveWeeks)
		out = append(out, Addition{CaseID: id, Weeks: ws})
	}
	slices.SortFunc(out, func(a, b Addition) int { return cmp.Compare(a.CaseID, b.CaseID) })
	return out
}
