package stats

import (
	"fmt"
	"math"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"
)

// Every cell of Table I of Newcombe RG, Two-sided confidence intervals for the
// single proportion: comparison of seven methods, Stat Med 1998;17:857-72,
// methods 1 (Wald), 3 (Wilson), 4 (Wilson with continuity correction) and
// 5 (Clopper-Pearson). Mark: verified (via a reproduction; every cell
// computed), check-values.md "Binomial 95% intervals".
func TestProportionCINewcombeTableI(t *testing.T) {
	tests := []struct {
		x, n   int
		m      Method
		lo, hi float64
	}{
		{81, 263, Wilson, 0.2553, 0.3662},
		{81, 263, WilsonCC, 0.2535, 0.3682},
		{81, 263, ClopperPearson, 0.2527, 0.3676},
		{81, 263, Wald, 0.2522, 0.3638},
		{15, 148, Wilson, 0.0624, 0.1605},
		{15, 148, WilsonCC, 0.0598, 0.1644},
		{15, 148, ClopperPearson, 0.0578, 0.1617},
		{15, 148, Wald, 0.0527, 0.1500},
		{0, 20, Wilson, 0, 0.1611},
		{0, 20, WilsonCC, 0, 0.2005},
		{0, 20, ClopperPearson, 0, 0.1684},
		{0, 20, Wald, 0, 0}, // Wald collapses at x = 0: the reason it is not used
		{1, 29, Wilson, 0.0061, 0.1718},
		{1, 29, WilsonCC, 0.0018, 0.1963},
		{1, 29, ClopperPearson, 0.0009, 0.1776},
		{1, 29, Wald, 0, 0.1009}, // lower bound -0.032 clipped to 0
	}
	for _, tt := range tests {
		t.Run(fmt.Sprintf("%d/%d %v", tt.x, tt.n, tt.m), func(t *testing.T) {
			got, err := ProportionCI(tt.x, tt.n, 0.95, tt.m)
			if err != nil {
				t.Fatal(err)
			}
			if round4(got.Lo) != tt.lo || round4(got.Hi) != tt.hi {
				t.Errorf("got %.4f-%.4f (%.7f-%.7f), want %.4f-%.4f", got.Lo, got.Hi, got.Lo, got.Hi, tt.lo, tt.hi)
			}
		})
	}
}

// Full-precision values. Mark: computed (check-values.md: recomputed
// independently at high precision, agreeing with Newcombe's Table I).
func TestProportionCIFullPrecision(t *testing.T) {
	tests := []struct {
		name   string
		x, n   int
		m      Method
		lo, hi float64
		tol    float64
	}{
		{"Wilson 81/263", 81, 263, Wilson, 0.2552885, 0.3662096, 5e-8},
		{"exact 81/263", 81, 263, ClopperPearson, 0.2527367, 0.3676219, 5e-8},
		// Only the lower bound is listed for 1/29; the upper is checked
		// against the reference library below.
		{"exact 1/29 lower", 1, 29, ClopperPearson, 0.000873, math.NaN(), 5e-7},
		// 0/20 exact upper has the closed form 1 - 0.025^(1/20) = 0.16843.
		{"exact 0/20", 0, 20, ClopperPearson, 0, 1 - math.Pow(0.025, 1.0/20), 1e-12},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got, err := ProportionCI(tt.x, tt.n, 0.95, tt.m)
			if err != nil {
				t.Fatal(err)
			}
			near(t, "lower", got.Lo, tt.lo, tt.tol)
			if !math.IsNaN(tt.hi) {
				near(t, "upper", got.Hi, tt.hi, tt.tol)
			}
		})
	}
	// The closed form itself, to five decimals as printed in check-values.md.
	near(t, "1 - 0.025^(1/20)", 1-math.Pow(0.025, 1.0/20), 0.16843, 5e-6)
}

// Our Clopper-Pearson bounds come from our own incomplete beta function and
// bisection; gonum's distuv.Beta quantile is an independent implementation
// (reference library) of the same Beta quantiles:
// lower = B(alpha/2; x, n-x+1), upper = B(1-alpha/2; x+1, n-x).
func TestClopperPearsonAgainstReferenceLibrary(t *testing.T) {
	cases := [][2]int{
		{1, 1}, {0, 1}, {1, 2}, {1, 29}, {15, 148}, {81, 263}, {3, 10}, {9, 10},
		{50, 100}, {1, 1000}, {999, 1000}, {120, 5000}, {4321, 100000}, {7, 250000},
	}
	for _, conf := range []float64{0.90, 0.95, 0.99} {
		for _, c := range cases {
			x, n := c[0], c[1]
			t.Run(fmt.Sprintf("%d/%d at %v", x, n, conf), func(t *testing.T) {
				got, err := ProportionCI(x, n, conf, ClopperPearson)
				if err != nil {
					t.Fatal(err)
				}
				a := 1 - conf
				wantLo, wantHi := 0.0, 1.0
				if x > 0 {
					wantLo = distuv.Beta{Alpha: float64(x), Beta: float64(n - x + 1)}.Quantile(a / 2)
				}
				if x < n {
					wantHi = distuv.Beta{Alpha: float64(x + 1), Beta: float64(n - x)}.Quantile(1 - a/2)
				}
				nearRel(t, "lower", got.Lo, wantLo, 1e-9)
				nearRel(t, "upper", got.Hi, wantHi, 1e-9)
			})
		}
	}
}

// binomialUpperTail is P(X >= x) for X ~ Binomial(n, p) by direct summation of
// the probability mass in log space: a second route to the same number that
// shares nothing with the incomplete beta continued fraction.
func binomialUpperTail(x, n int, p float64) float64 {
	var s float64
	for k := x; k <= n; k++ {
		lc := lgamma(float64(n+1)) - lgamma(float64(k+1)) - lgamma(float64(n-k+1))
		s += math.Exp(lc + float64(k)*math.Log(p) + float64(n-k)*math.Log1p(-p))
	}
	return s
}

// The defining property of the exact interval (Clopper CJ, Pearson ES.
// Biometrika 1934;26:404-13): at the lower bound P(X >= x) = alpha/2 and at
// the upper bound P(X <= x) = alpha/2. Checked by direct binomial sums.
func TestClopperPearsonTailProperty(t *testing.T) {
	for _, c := range [][2]int{{1, 29}, {15, 148}, {81, 263}, {5, 7}, {200, 400}} {
		x, n := c[0], c[1]
		iv, err := ProportionCI(x, n, 0.95, ClopperPearson)
		if err != nil {
			t.Fatal(err)
		}
		name := fmt.Sprintf("%d/%d", x, n)
		nearRel(t, name+" P(X>=x) at lower", binomialUpperTail(x, n, iv.Lo), 0.025, 1e-9)
		nearRel(t, name+" P(X<=x) at upper", 1-binomialUpperTail(x+1, n, iv.Hi), 0.025, 1e-9)
	}
}

// At the edges the bounds that are fixed by definition must be exact, and the
// exact method has closed forms: x = 0 upper 1 - (a/2)^(1/n), x = n lower
// (a/2)^(1/n) (computed from the binomial tails: P(X = 0) = (1-p)^n).
// Wilson at x = 0 has upper bound z^2 / (n + z^2) (algebra on Wilson's formula).
func TestProportionCIEdges(t *testing.T) {
	z := 1.959963984540054 // standard normal 0.975 quantile (computed; standard tables give 1.95996)
	for _, n := range []int{1, 2, 5, 20, 29, 1000} {
		nf := float64(n)
		for _, m := range []Method{Wilson, WilsonCC, ClopperPearson, Wald} {
			zero, err := ProportionCI(0, n, 0.95, m)
			if err != nil {
				t.Fatal(err)
			}
			all, err := ProportionCI(n, n, 0.95, m)
			if err != nil {
				t.Fatal(err)
			}
			if zero.Lo != 0 || all.Hi != 1 {
				t.Errorf("%v n=%d: 0/n lower %v, n/n upper %v, want exactly 0 and 1", m, n, zero.Lo, all.Hi)
			}
			// Symmetry: swapping successes and failures mirrors the interval.
			near(t, fmt.Sprintf("%v n=%d mirror lower", m, n), all.Lo, 1-zero.Hi, 1e-12)
		}
		cp, _ := ProportionCI(0, n, 0.95, ClopperPearson)
		near(t, fmt.Sprintf("exact 0/%d upper", n), cp.Hi, 1-math.Pow(0.025, 1/nf), 1e-12)
		cp, _ = ProportionCI(n, n, 0.95, ClopperPearson)
		near(t, fmt.Sprintf("exact %d/%d lower", n, n), cp.Lo, math.Pow(0.025, 1/nf), 1e-12)
		w, _ := ProportionCI(0, n, 0.95, Wilson)
		near(t, fmt.Sprintf("Wilson 0/%d upper", n), w.Hi, z*z/(nf+z*z), 1e-12)
	}
}

// Every interval must contain the point estimate and lie inside [0, 1].
func TestProportionCIContainsEstimate(t *testing.T) {
	for n := 1; n <= 40; n++ {
		for x := 0; x <= n; x++ {
			for _, m := range []Method{Wilson, WilsonCC, ClopperPearson, Wald} {
				iv, err := ProportionCI(x, n, 0.95, m)
				if err != nil {
					t.Fatal(err)
				}
				p := float64(x) / float64(n)
				if !(iv.Lo >= 0 && iv.Hi <= 1 && iv.Contains(p)) {
					t.Errorf("%v %d/%d: %v does not hold %v inside [0, 1]", m, x, n, iv, p)
				}
			}
		}
	}
}

func TestProportionCIInvalid(t *testing.T) {
	tests := []struct {
		name string
		x, n int
		conf float64
		m    Method
	}{
		{"n zero", 0, 0, 0.95, Wilson},
		{"n negative", 0, -3, 0.95, Wilson},
		{"x negative", -1, 10, 0.95, Wilson},
		{"x above n", 11, 10, 0.95, ClopperPearson},
		{"conf 1", 1, 10, 1, Wilson},
		{"conf 0", 1, 10, 0, Wilson},
		{"conf 95 not 0.95", 1, 10, 95, Wilson},
		{"conf NaN", 1, 10, math.NaN(), Wilson},
		{"no method", 1, 10, 0.95, 0},
	}
	for _, tt := range tests {
		_, err := ProportionCI(tt.x, tt.n, tt.conf, tt.m)
		wantInvalid(t, tt.name, err)
	}
}

func TestFraction(t *testing.T) {
	if v := (Fraction{0, 0}).Value(); !math.IsNaN(v) {
		t.Errorf("0/0 value = %v, want NaN", v)
	}
	f := Fraction{81, 263}
	near(t, "81/263", f.Value(), 81.0/263, 0)
	got, err := f.CI(Wilson, 0.95)
	if err != nil {
		t.Fatal(err)
	}
	want, _ := ProportionCI(81, 263, 0.95, Wilson)
	if got != want {
		t.Errorf("Fraction.CI = %v, want %v", got, want)
	}
	if s := ClopperPearson.String(); s != "Clopper-Pearson exact" {
		t.Errorf("String = %q", s)
	}
}

// Our Beta quantiles beside the reference library's, as a ratio of times in
// the same run: go test -bench ClopperPearson ./cohort/stats
func BenchmarkClopperPearson(b *testing.B) {
	b.Run("ours", func(b *testing.B) {
		for b.Loop() {
			_, _ = ProportionCI(81, 263, 0.95, ClopperPearson)
		}
	})
	b.Run("reference", func(b *testing.B) {
		for b.Loop() {
			_ = distuv.Beta{Alpha: 81, Beta: 183}.Quantile(0.025)
			_ = distuv.Beta{Alpha: 82, Beta: 182}.Quantile(0.975)
		}
	})
}
