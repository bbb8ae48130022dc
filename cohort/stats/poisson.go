package stats

import (
	"fmt"
	"math"
)

// PoissonCI returns the exact (Garwood) two-sided interval for the mean of a
// Poisson count x: lower = chi2(alpha/2; 2x)/2 (0 when x = 0) and
// upper = chi2(1 - alpha/2; 2x + 2)/2 (Garwood F. Biometrika 1936;28:437-42).
// The chi-square quantiles are computed by our own incomplete gamma function:
// chi2(p; 2a)/2 is the unit-rate Gamma(a) quantile.
func PoissonCI(x int, conf float64) (Interval, error) {
	if x < 0 {
		return Interval{}, fmt.Errorf("stats: poisson: count %d is negative: %w", x, ErrInvalid)
	}
	if err := checkConf("poisson", conf); err != nil {
		return Interval{}, err
	}
	half := (1 - conf) / 2
	var iv Interval
	if x > 0 {
		iv.Lo = gammaLowerQuantile(half, float64(x))
	}
	iv.Hi = gammaUpperQuantile(half, float64(x+1))
	return iv, nil
}

// PoissonRate returns count/exposure with its exact interval, for rates such
// as enrolments per week (exposure = weeks observed).
func PoissonRate(count int, exposure, conf float64) (rate float64, ci Interval, err error) {
	if !(exposure > 0) || math.IsInf(exposure, 0) {
		return 0, Interval{}, fmt.Errorf("stats: poisson rate: exposure %v must be positive and finite: %w", exposure, ErrInvalid)
	}
	ci, err = PoissonCI(count, conf)
	if err != nil {
		return 0, Interval{}, err
	}
	return float64(count) / exposure, Interval{ci.Lo / exposure, ci.Hi / exposure}, nil
}
