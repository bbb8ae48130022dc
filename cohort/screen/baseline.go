package screen

import (
	"fmt"
	"slices"
)

// Baseline is a participant's own MASD level per window size, taken from the
// results of their baseline weeks (study weeks 0..K-1). Only negative weeks
// count: a participant already in an irregular rhythm at enrolment must not
// have it learnt as their normal, so with too few negative weeks the baseline
// is not established and absolute thresholds apply.
type Baseline struct {
	// Wanted is K, the number of baseline weeks the protocol asks for.
	Wanted int `json:"wanted"`
	// Weeks is the number of negative baseline weeks found.
	Weeks int `json:"weeks"`
	// Minutes are the window sizes, in protocol order, the levels belong to.
	Minutes []int `json:"minutes"`
	// Level is, per window size, the median over the negative baseline weeks
	// that have usable windows of that size of each week's median MASD (bpm);
	// 0 when no such week exists.
	Level []float64 `json:"level"`
}

// Established reports whether all K baseline weeks were negative, so the
// baseline can raise thresholds.
func (b *Baseline) Established() bool { return b != nil && b.Wanted > 0 && b.Weeks >= b.Wanted }

// NewBaseline builds a participant's baseline from the results of their
// baseline weeks, screened under p without a baseline. Every result must be of
// a distinct week in 0..K-1 and carry p's window sizes; weeks with no result
// (no data at all) simply do not count.
func NewBaseline(p Protocol, first []Result) (*Baseline, error) {
	if !p.Baseline.Enabled {
		return nil, fmt.Errorf("screen: baseline: the protocol's baseline is off")
	}
	k := p.Baseline.Weeks
	b := &Baseline{Wanted: k, Minutes: make([]int, len(p.Windows)), Level: make([]float64, len(p.Windows))}
	for i, r := range p.Windows {
		b.Minutes[i] = r.Minutes
	}
	seen := make(map[int]bool, len(first))
	perRule := make([][]float64, len(p.Windows))
	for _, res := range first {
		if res.Week < 0 || res.Week >= k {
			return nil, fmt.Errorf("screen: baseline: result of week %d is outside the baseline weeks 0-%d", res.Week, k-1)
		}
		if seen[res.Week] {
			return nil, fmt.Errorf("screen: baseline: week %d given twice", res.Week)
		}
		seen[res.Week] = true
		if len(res.Windows) != len(p.Windows) {
			return nil, fmt.Errorf("screen: baseline: week %d has %d window sizes, the protocol %d", res.Week, len(res.Windows), len(p.Windows))
		}
		for i, wr := range res.Windows {
			if wr.Minutes != p.Windows[i].Minutes {
				return nil, fmt.Errorf("screen: baseline: week %d windows[%d] is %d minutes, the protocol's %d", res.Week, i, wr.Minutes, p.Windows[i].Minutes)
			}
		}
		if res.Verdict != Negative {
			continue
		}
		b.Weeks++
		for i, wr := range res.Windows {
			if wr.Usable > 0 {
				perRule[i] = append(perRule[i], wr.MedianMASD)
			}
		}
	}
	for i, levels := range perRule {
		b.Level[i] = median(levels)
	}
	return b, nil
}

// baselineThresholds returns the per-window-size thresholds for a week (nil
// for the absolute ones) and how the baseline was used (nil when off).
func baselineThresholds(week int, p Protocol, base *Baseline) ([]float64, *BaselineUse, error) {
	if !p.Baseline.Enabled {
		if base != nil {
			return nil, nil, fmt.Errorf("screen: week %d: a baseline was given but the protocol's baseline is off", week)
		}
		return nil, nil, nil
	}
	if week >= 0 && week < p.Baseline.Weeks {
		return nil, &BaselineUse{Status: "baseline_week"}, nil
	}
	if base == nil {
		return nil, &BaselineUse{Status: "not_supplied"}, nil
	}
	if !slices.Equal(base.Minutes, minutesOf(p)) || len(base.Level) != len(p.Windows) {
		return nil, nil, fmt.Errorf("screen: week %d: the baseline's window sizes %v differ from the protocol's %v", week, base.Minutes, minutesOf(p))
	}
	if base.Wanted != p.Baseline.Weeks {
		return nil, nil, fmt.Errorf("screen: week %d: the baseline rests on %d weeks, the protocol asks for %d", week, base.Wanted, p.Baseline.Weeks)
	}
	if !base.Established() {
		return nil, &BaselineUse{Status: "not_established", Weeks: base.Weeks}, nil
	}
	th := make([]float64, len(p.Windows))
	for i, r := range p.Windows {
		th[i] = max(r.MASDThreshold, p.Baseline.Factor*base.Level[i])
	}
	return th, &BaselineUse{Status: "applied", Weeks: base.Weeks}, nil
}

func minutesOf(p Protocol) []int {
	m := make([]int, len(p.Windows))
	for i, r := range p.Windows {
		m[i] = r.Minutes
	}
	return m
}
