package screen

import (
	"fmt"
)

// Sweep recomputes the verdict of every prepared week for each value of one
// parameter, for a threshold explorer: out[v][w] is the verdict of weeks[w]
// with param set to values[v]. param is a JSON path from Sweepable (with a
// real window index, e.g. "windows[0].masd_threshold"). bases is nil or holds
// one baseline (or nil) per week. The readings are never touched again: each
// value costs one pass over the window summaries, a few thousand per week.
// Every swept protocol must validate; the first that does not is an error
// naming the value.
func Sweep(weeks []*Prepared, bases []*Baseline, p Protocol, param string, values []float64) ([][]Verdict, error) {
	if bases != nil && len(bases) != len(weeks) {
		return nil, fmt.Errorf("screen: sweep: %d baselines for %d weeks", len(bases), len(weeks))
	}
	protocols := make([]Protocol, len(values))
	out := make([][]Verdict, len(values))
	for vi, v := range values {
		q, err := p.With(param, v)
		if err != nil {
			return nil, err
		}
		if err := q.Validate(); err != nil {
			return nil, fmt.Errorf("screen: sweep: %s = %v: %w", param, v, err)
		}
		protocols[vi] = q
		out[vi] = make([]Verdict, len(weeks))
	}
	// Weeks outside, values inside: one week's summaries stay in cache while
	// every value is tried on them.
	for wi, pr := range weeks {
		var b *Baseline
		if bases != nil {
			b = bases[wi]
		}
		for vi, q := range protocols {
			res, err := evaluate(pr, q, b, false)
			if err != nil {
				return nil, fmt.Errorf("screen: sweep: %s = %v: %w", param, values[vi], err)
			}
			out[vi][wi] = res.Verdict
		}
	}
	return out, nil
}
