// Package stats holds the study's summary statistics: intervals for a
// proportion and for a Poisson count, diagnostic accuracy from a 2x2 table,
// Cohen's kappa, the Kaplan-Meier estimator, enrolment projection and age
// bands for subgroup tables.
//
// Every function is pure: no I/O, no clock (the "as of" date is passed in).
// The distribution functions behind the exact intervals are written here from
// their textbook definitions rather than taken from a numeric library, so the
// tests can use such a library as an independent reference.
package stats

import "errors"

// ErrInvalid marks an input the statistics cannot be computed from (a count
// larger than its total, a confidence level outside (0, 1), a negative time).
// Callers test for it with errors.Is; the wrapped message names the field.
var ErrInvalid = errors.New("invalid input")

// Interval is a two-sided confidence interval [Lo, Hi].
type Interval struct {
	Lo, Hi float64 // inclusive bounds, Lo <= Hi
}

// Contains reports whether v lies inside the closed interval.
func (iv Interval) Contains(v float64) bool { return iv.Lo <= v && v <= iv.Hi }
