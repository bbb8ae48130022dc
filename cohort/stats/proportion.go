package stats

import (
	"fmt"
	"math"
)

// Method selects how a confidence interval for a single proportion is built.
// The four are methods 1, 3, 4 and 5 of Newcombe RG, Two-sided confidence
// intervals for the single proportion: comparison of seven methods, Stat Med
// 1998;17:857-72. Wilson is the usual choice for the flag's PPV; the exact
// interval is reported beside it because reviewers expect it; Wald is kept only
// to show readers why it is not used (it collapses to 0-0 at x = 0).
type Method int

// The interval methods. Zero is not a method, so a forgotten field is caught.
const (
	Wilson         Method = iota + 1 // Wilson score interval (Newcombe method 3)
	WilsonCC                         // Wilson score with continuity correction (method 4)
	ClopperPearson                   // exact interval from binomial tails (method 5)
	Wald                             // simple asymptotic p +- z*se, clipped to [0, 1] (method 1)
)

// String names the method as it appears beside an interval on screen.
func (m Method) String() string {
	switch m {
	case Wilson:
		return "Wilson score"
	case WilsonCC:
		return "Wilson score, continuity-corrected"
	case ClopperPearson:
		return "Clopper-Pearson exact"
	case Wald:
		return "Wald"
	}
	return fmt.Sprintf("method(%d)", int(m))
}

// Fraction is x successes out of n, kept as counts so that the screen can show
// "231/263" beside the ratio and compute any interval later.
type Fraction struct {
	X, N int // successes and trials, 0 <= X <= N
}

// Value is X/N, or NaN when N is zero (a ratio with no denominator has no value,
// and NaN makes that impossible to mistake for 0%).
func (f Fraction) Value() float64 {
	if f.N == 0 {
		return math.NaN()
	}
	return float64(f.X) / float64(f.N)
}

// CI is the confidence interval of the fraction by the given method.
func (f Fraction) CI(m Method, conf float64) (Interval, error) {
	return ProportionCI(f.X, f.N, conf, m)
}

// ProportionCI returns the two-sided interval at confidence level conf (for
// example 0.95) for x successes out of n trials.
//
// Conventions: the bounds are clipped to [0, 1] (this matters for Wald only);
// at x = 0 every method's lower bound is exactly 0 and at x = n every upper
// bound is exactly 1, as in Newcombe's Table I.
func ProportionCI(x, n int, conf float64, m Method) (Interval, error) {
	if err := checkCounts("proportion", x, n); err != nil {
		return Interval{}, err
	}
	if err := checkConf("proportion", conf); err != nil {
		return Interval{}, err
	}
	z := normalQuantile(conf)
	switch m {
	case Wilson:
		return wilson(x, n, z), nil
	case WilsonCC:
		return wilsonCC(x, n, z), nil
	case ClopperPearson:
		return clopperPearson(x, n, conf), nil
	case Wald:
		return wald(x, n, z), nil
	}
	return Interval{}, fmt.Errorf("stats: proportion: method %d is unknown: %w", int(m), ErrInvalid)
}

func wilson(x, n int, z float64) Interval {
	nf, p := float64(n), float64(x)/float64(n)
	z2 := z * z
	centre := (2*nf*p + z2) / (2 * (nf + z2))
	half := z * math.Sqrt(z2+4*nf*p*(1-p)) / (2 * (nf + z2))
	iv := Interval{centre - half, centre + half}
	return pin(iv, x, n)
}

// wilsonCC follows Newcombe's formulas for method 4; the square roots are
// guarded because at p = 0 or 1 the bound is fixed by definition and the
// expression under the root may be negative.
func wilsonCC(x, n int, z float64) Interval {
	nf, p := float64(n), float64(x)/float64(n)
	z2 := z * z
	den := 2 * (nf + z2)
	var iv Interval
	if x > 0 {
		iv.Lo = (2*nf*p + z2 - 1 - z*math.Sqrt(z2-2-1/nf+4*p*(nf*(1-p)+1))) / den
	}
	if x < n {
		iv.Hi = (2*nf*p + z2 + 1 + z*math.Sqrt(z2+2-1/nf+4*p*(nf*(1-p)-1))) / den
	}
	return pin(iv, x, n)
}

func wald(x, n int, z float64) Interval {
	nf, p := float64(n), float64(x)/float64(n)
	se := math.Sqrt(p * (1 - p) / nf)
	return pin(Interval{p - z*se, p + z*se}, x, n)
}

// clopperPearson inverts the two binomial tails: the lower bound is the p at
// which P(X >= x) = alpha/2, the upper the p at which P(X <= x) = alpha/2.
// Through the identity P(X >= x | n, p) = I_p(x, n-x+1) these are the Beta
// quantiles B(alpha/2; x, n-x+1) and B(1-alpha/2; x+1, n-x); we solve them by
// bisection on our own incomplete beta function.
func clopperPearson(x, n int, conf float64) Interval {
	half := (1 - conf) / 2
	iv := Interval{0, 1}
	if x > 0 {
		iv.Lo = betaLowerQuantile(half, float64(x), float64(n-x+1))
	}
	if x < n {
		iv.Hi = betaUpperQuantile(half, float64(x+1), float64(n-x))
	}
	return iv
}

// pin clips to [0, 1] and fixes the bound that is exact by definition at the
// edges, so rounding cannot print 1e-17 where the reader expects 0.
func pin(iv Interval, x, n int) Interval {
	iv.Lo = math.Max(0, iv.Lo)
	iv.Hi = math.Min(1, iv.Hi)
	if x == 0 {
		iv.Lo = 0
	}
	if x == n {
		iv.Hi = 1
	}
	return iv
}

func checkCounts(where string, x, n int) error {
	switch {
	case n <= 0:
		return fmt.Errorf("stats: %s: n = %d, want at least 1: %w", where, n, ErrInvalid)
	case x < 0:
		return fmt.Errorf("stats: %s: x = %d is negative: %w", where, x, ErrInvalid)
	case x > n:
		return fmt.Errorf("stats: %s: x = %d exceeds n = %d: %w", where, x, n, ErrInvalid)
	}
	return nil
}

func checkConf(where string, conf float64) error {
	if !(conf > 0 && conf < 1) {
		return fmt.Errorf("stats: %s: confidence level %v is outside (0, 1): %w", where, conf, ErrInvalid)
	}
	return nil
}
