package demo

import (
	"math"
	"math/rand/v2"
	"slices"
	"time"

	"cohortdesk/cohort"
)

// EpisodeKind names the rhythm behind a stretch of synthetic wear data.
type EpisodeKind string

// The episode kinds. Ectopy (frequent early beats) is there so the screen has
// something to be wrong about: it makes heart-rate readings jumpy too, but an
// over-read will not find AF.
const (
	EpisodeAF     EpisodeKind = "af"
	EpisodeEctopy EpisodeKind = "ectopy"
)

// Episode is one ground-truth rhythm episode, in the participant's zone.
type Episode struct {
	Kind       EpisodeKind
	Start, End time.Time
}

// Interval is a half-open stretch of time [Start, End).
type Interval struct{ Start, End time.Time }

// Truth is what the generator put into a participant's data, for tests and for
// the demo loader (which derives ECG recordings and over-reads from it).
type Truth struct {
	Episodes []Episode  // sorted by start; AF and ectopy episodes
	Silent   []Interval // non-wear of 14 days or more, including a tail after the participant stopped wearing the watch
}

// AF returns only the AF episodes.
func (t Truth) AF() []Interval {
	var out []Interval
	for _, e := range t.Episodes {
		if e.Kind == EpisodeAF {
			out = append(out, Interval{e.Start, e.End})
		}
	}
	return out
}

// HasAF reports whether the participant has any AF episode in the data.
func (t Truth) HasAF() bool { return len(t.AF()) > 0 }

// Truth returns the ground truth of p's data.
func (s *Study) Truth(p Participant) Truth {
	pl, ok := s.planOf(p)
	if !ok {
		return Truth{}
	}
	var t Truth
	for _, e := range pl.episodes {
		t.Episodes = append(t.Episodes, Episode{e.kind, time.UnixMilli(e.a).In(pl.loc), time.UnixMilli(e.b).In(pl.loc)})
	}
	for _, q := range pl.silent {
		t.Silent = append(t.Silent, Interval{time.UnixMilli(q.a).In(pl.loc), time.UnixMilli(min(q.b, pl.dataEnd)).In(pl.loc)})
	}
	return t
}

// chooseConditions decides who has AF or ectopy episodes, who withdraws, who
// goes silent for two weeks or more and who stops wearing the watch, and draws
// their episodes. Counts are fixed shares of the study (rounded), so the demo
// always shows each situation.
func (s *Study) chooseConditions(sel *selector, today cohort.Date) {
	n := len(s.Participants)
	share := func(f float64, least int) int { return max(least, int(math.Round(float64(n)*f))) }
	sel.taken = map[int]bool{}
	for _, c := range s.canaries {
		sel.taken[c.index] = true
	}
	eligible := func(weeks int) func(int) bool {
		return func(k int) bool { return s.plans[k].weeks >= weeks }
	}
	// Canary 0 has AF, so referral summaries of a canary exist to be checked.
	var afs []int
	if len(s.canaries) > 0 && s.plans[s.canaries[0].index].weeks >= 3 {
		afs = append(afs, s.canaries[0].index)
	}
	ageWeight := func(k int) float64 {
		return math.Pow(float64(max(1, s.Participants[k].AgeOn(today)-35)), 1.5)
	}
	afs = append(afs, sel.choose(share(s.afShare, 1)-len(afs), n, eligible(3), ageWeight, true)...)
	ects := sel.choose(share(0.03, 1), n, eligible(3), nil, true)
	for _, k := range sel.choose(share(0.04, 1), n, func(k int) bool { return today.DaysSince(s.Participants[k].Enrolled) >= 14 }, nil, true) {
		p := &s.Participants[k]
		p.Withdrawn = p.Enrolled.AddDays(betweenInt(sel.r, 7, today.DaysSince(p.Enrolled)-1))
		p.WithdrawalReason = withdrawalReasons[sel.r.IntN(len(withdrawalReasons))]
		s.setDataEnd(k, &s.plans[k])
	}
	for _, k := range sel.choose(share(0.04, 1), n, eligible(6), nil, true) {
		pl := &s.plans[k]
		a := pl.dataStart + int64(betweenInt(sel.r, 7, int((pl.dataEnd-pl.dataStart)/day)-16))*day + sel.r.Int64N(day)
		pl.silent = append(pl.silent, span{a, min(pl.dataEnd, a+int64(betweenInt(sel.r, 14, 30))*day)})
	}
	for _, k := range sel.choose(share(0.02, 1), n, eligible(5), nil, true) {
		pl := &s.plans[k]
		a := pl.dataStart + int64(betweenInt(sel.r, 14, int((pl.dataEnd-pl.dataStart)/day)-7))*day + sel.r.Int64N(day)
		pl.silent = append(pl.silent, span{a, math.MaxInt64})
	}
	for _, k := range afs {
		s.placeEpisodes(k, EpisodeAF)
	}
	for _, k := range ects {
		s.placeEpisodes(k, EpisodeEctopy)
	}
	s.withdrawDuringFollowUp(sel, afs, today)
}

// placeEpisodes draws one to four episodes for participant k inside the data
// window, clear of silences and of each other. The first is long enough (6 to
// 48 hours) that a screen working on whole weeks can see it.
func (s *Study) placeEpisodes(k int, kind EpisodeKind) {
	pl := &s.plans[k]
	r := newRand(s.seed, streamPlan, uint64(k), 1)
	count := 1 + pick(r, []float64{0.3, 0.35, 0.2, 0.15})
	if kind == EpisodeEctopy {
		count = min(count, 3)
	}
	for i := range count {
		for range 40 {
			var dur int64
			switch {
			case kind == EpisodeEctopy:
				dur = logUniform(r, 3*hour, 16*hour)
			case i == 0:
				dur = logUniform(r, 6*hour, 48*hour)
			default:
				dur = logUniform(r, 2*hour, 72*hour)
			}
			room := pl.dataEnd - pl.dataStart - 2*day - dur
			if room <= 0 {
				continue
			}
			a := pl.dataStart + day + r.Int64N(room)
			e := episode{a, a + dur, kind}
			if overlaps(pl.silent, e.a-day, e.b+day) || slices.ContainsFunc(pl.episodes, func(o episode) bool {
				return o.a < e.b+2*day && o.b > e.a-2*day
			}) {
				continue
			}
			pl.episodes = append(pl.episodes, e)
			break
		}
	}
	slices.SortFunc(pl.episodes, func(a, b episode) int { return cmpInt64(a.a, b.a) })
}

// withdrawDuringFollowUp makes one AF participant (not a canary) withdraw a
// couple of weeks after the week of their first episode, while the follow-up
// case for it would be open.
func (s *Study) withdrawDuringFollowUp(sel *selector, afs []int, today cohort.Date) {
	todayMs := s.Today.UnixMilli()
	var cand []int
	for _, k := range afs {
		pl := &s.plans[k]
		if s.Participants[k].Canary || len(pl.episodes) == 0 {
			continue
		}
		wk := int((pl.episodes[0].a - pl.dataStart) / (7 * day))
		_, we := cohort.WeekBounds(pl.enrolled, pl.loc, wk)
		if we.UnixMilli()+24*day < todayMs {
			cand = append(cand, k)
		}
	}
	if len(cand) == 0 {
		return
	}
	k := cand[sel.r.IntN(len(cand))]
	p, pl := &s.Participants[k], &s.plans[k]
	wk := int((pl.episodes[0].a - pl.dataStart) / (7 * day))
	_, we := cohort.WeekBounds(pl.enrolled, pl.loc, wk)
	p.Withdrawn = cohort.DateOf(we).AddDays(betweenInt(sel.r, 12, 20))
	p.WithdrawalReason = reasonDuringFollowUp
	s.setDataEnd(k, pl)
	kept := pl.episodes[:0]
	for _, e := range pl.episodes {
		if e.a < pl.dataEnd {
			e.b = min(e.b, pl.dataEnd)
			kept = append(kept, e)
		}
	}
	pl.episodes = kept
}

// logUniform draws a duration whose logarithm is uniform on [lo, hi]: episodes
// of a few hours are as common as episodes of a day.
func logUniform(r *rand.Rand, lo, hi int64) int64 {
	return int64(math.Exp(between(r, math.Log(float64(lo)), math.Log(float64(hi)))))
}

func cmpInt64(a, b int64) int {
	switch {
	case a < b:
		return -1
	case a > b:
		return 1
	}
	return 0
}

// CaseInput is a follow-up case as the demo loader opens it: whose, and when.
type CaseInput struct {
	StudyID string
	Week    int       // first screen-positive study week of the case
	Opened  time.Time // when the case was opened
}

// ExpectedCases lists the cases an ideal screen would open: one per run of
// consecutive study weeks that hold at least two hours of an AF or ectopy
// episode, opened nine hours after the run's first week ends (09:00 local,
// the morning after, except across a clock change), and only when that is
// not after today. The loader may open cases from a real
// screen instead; PlanFollowUps accepts any list.
func (s *Study) ExpectedCases() []CaseInput {
	var out []CaseInput
	for _, p := range s.Participants {
		pl := &s.plans[p.index]
		var weeks []int
		for _, e := range pl.episodes {
			for n := range pl.weeks {
				ws, we := cohort.WeekBounds(pl.enrolled, pl.loc, n)
				a, b := max(e.a, ws.UnixMilli()), min(e.b, we.UnixMilli())
				if b-a >= 2*hour && !slices.Contains(weeks, n) {
					weeks = append(weeks, n)
				}
			}
		}
		slices.Sort(weeks)
		for i, n := range weeks {
			if i > 0 && weeks[i-1] == n-1 {
				continue
			}
			_, we := cohort.WeekBounds(pl.enrolled, pl.loc, n)
			opened := we.Add(9 * time.Hour)
			if opened.After(s.Today) {
				continue
			}
			out = append(out, CaseInput{StudyID: p.StudyID, Week: n, Opened: opened})
		}
	}
	slices.SortStableFunc(out, func(a, b CaseInput) int { return a.Opened.Compare(b.Opened) })
	return out
}
