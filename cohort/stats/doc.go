// Package stats holds the study's summary statistics: intervals for a
// proportion and for a Poisson count, diagnostic accuracy from a 2x2 table,
// Cohen's kappa, the Kaplan-Meier estimator, enrolment projection and age
// bands for subgroup tables.
//
// Every function is pure: no I/O, no clock (the "as of" date is passed in).
// The distribution functions behind the exact intervals are written here from
// their textbook definitions rather than taken from a numeric library, so the
// tests can use such a library as an independent reference.
//
// # The figures a study reports, and their intervals
//
// A study reports small counts, so every proportion is shown with its count
// ("231/263") and a 95% interval saying how much the count can tell:
//
//   - The PPV of the flag (positive predictive value): of the flagged episodes
//     whose recording got a diagnostic over-read, the share in which AF was
//     confirmed. It is the study's main measure of how often a flag is right.
//     Uninterpretable recordings are counted and shown apart, not dropped.
//   - Intervals for a proportion (ProportionCI, Fraction.CI): the Wilson score
//     interval, the usual choice, with the Clopper-Pearson exact interval beside
//     it; both from Newcombe's comparison of seven methods (Stat Med 1998). The
//     exact limits are quantiles of Beta distributions, computed here.
//   - Diagnostic accuracy (Diagnostic): sensitivity, specificity, PPV and NPV of
//     a 2x2 table, used when a threshold sweep compares its flags with
//     over-read ECGs.
//   - Time from flag to over-read (KaplanMeier): cases still open are censored
//     (counted as "not yet" at the time they have reached) rather than left out,
//     so the median is not biased towards the quick cases.
//   - Agreement between the recorder's automatic reading and the over-read
//     (CohenKappa): agreement beyond what chance alone would give, with its
//     standard error and interval.
//   - Enrolment (ProjectEnrolment): the recent weekly rate, with an exact
//     Poisson interval (PoissonCI), gives the expected date of reaching the
//     target and an optimistic and a pessimistic one.
//   - Subgroups by age use bands (AgeBands).
//
// Each check value in the tests names its published source or says that it
// was computed or is from memory.
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
