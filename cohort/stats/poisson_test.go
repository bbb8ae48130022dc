package stats

import (
	"fmt"
	"math"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"
)

// Tabulated exact Poisson 95% limits, from memory (they appear in the
// usual tables of Poisson confidence limits): x = 0 gives 0-3.689, x = 1
// 0.0253-5.572, x = 10 4.795-18.39. The reference-library test below is the
// independent check.
func TestPoissonCITabulated(t *testing.T) {
	tests := []struct {
		x      int
		lo, hi float64
		tol    float64
	}{
		{0, 0, 3.689, 0.0005},
		{1, 0.0253, 5.572, 0.0005},
		{10, 4.795, 18.39, 0.005},
	}
	for _, tt := range tests {
		got, err := PoissonCI(tt.x, 0.95)
		if err != nil {
			t.Fatal(err)
		}
		near(t, fmt.Sprintf("x=%d lower", tt.x), got.Lo, tt.lo, tt.tol)
		near(t, fmt.Sprintf("x=%d upper", tt.x), got.Hi, tt.hi, tt.tol)
	}
	// x = 0 has the closed form -ln(alpha/2) (P(X = 0) = exp(-mu)).
	got, _ := PoissonCI(0, 0.95)
	near(t, "x=0 upper closed form", got.Hi, -math.Log(0.025), 1e-12)
}

// Garwood's limits are chi-square quantiles; gonum's distuv.ChiSquared and
// distuv.Gamma (reference library) compute them by their own routines.
func TestPoissonCIAgainstReferenceLibrary(t *testing.T) {
	for _, conf := range []float64{0.80, 0.95, 0.99} {
		a := 1 - conf
		for _, x := range []int{0, 1, 2, 3, 5, 10, 17, 40, 100, 1000, 25000} {
			got, err := PoissonCI(x, conf)
			if err != nil {
				t.Fatal(err)
			}
			wantLo := 0.0
			if x > 0 {
				wantLo = distuv.ChiSquared{K: float64(2 * x)}.Quantile(a/2) / 2
			}
			wantHi := distuv.ChiSquared{K: float64(2*x + 2)}.Quantile(1-a/2) / 2
			name := fmt.Sprintf("x=%d conf=%v", x, conf)
			nearRel(t, name+" lower", got.Lo, wantLo, 1e-9)
			nearRel(t, name+" upper", got.Hi, wantHi, 1e-9)
			// The same limits as unit-rate Gamma quantiles.
			nearRel(t, name+" upper (gamma)", got.Hi, distuv.Gamma{Alpha: float64(x + 1), Beta: 1}.Quantile(1-a/2), 1e-9)
		}
	}
}

func TestChiSquareQuantileAgainstReferenceLibrary(t *testing.T) {
	for _, k := range []float64{0.5, 1, 2, 3, 7.5, 20, 101, 5000} {
		for _, p := range []float64{0.001, 0.025, 0.3, 0.5, 0.7, 0.975, 0.999, 1 - 1e-8} {
			want := distuv.ChiSquared{K: k}.Quantile(p)
			nearRel(t, fmt.Sprintf("chi2(%v; %v)", p, k), chiSquareQuantile(p, k), want, 1e-8)
		}
	}
	// Far in the lower tail the reference library's inverse loses accuracy
	// (at p = 1e-8, k = 1 it returns 2.94e-16), so there we check the
	// small-x expansions instead (computed): for k = 1, P = erf(sqrt(x/2))
	// ~ sqrt(2x/pi), so x ~ (pi/2) p^2; for k = 0.5, P(1/4, x/2) ~
	// (x/2)^(1/4) / Gamma(5/4), so x ~ 2 (p Gamma(5/4))^4.
	nearRel(t, "chi2(1e-8; 1)", chiSquareQuantile(1e-8, 1), math.Pi/2*1e-16, 1e-6)
	g54 := math.Gamma(1.25)
	nearRel(t, "chi2(1e-8; 0.5)", chiSquareQuantile(1e-8, 0.5), 2*math.Pow(1e-8*g54, 4), 1e-6)
	// Printed in every chi-square table (from memory): chi2(0.95; 1) = 3.841,
	// chi2(0.95; 10) = 18.307.
	near(t, "chi2(0.95; 1)", chiSquareQuantile(0.95, 1), 3.841, 0.0005)
	near(t, "chi2(0.95; 10)", chiSquareQuantile(0.95, 10), 18.307, 0.0005)
}

// poissonCDF is P(X <= x) for X ~ Poisson(mu) by direct summation (computed;
// independent of our incomplete gamma function).
func poissonCDF(x int, mu float64) float64 {
	var s float64
	for k := 0; k <= x; k++ {
		s += math.Exp(float64(k)*math.Log(mu) - mu - lgamma(float64(k+1)))
	}
	return s
}

// Garwood's defining property: P(X >= x | lower) = P(X <= x | upper) = a/2.
func TestPoissonCITailProperty(t *testing.T) {
	for _, x := range []int{1, 4, 10, 60} {
		iv, err := PoissonCI(x, 0.95)
		if err != nil {
			t.Fatal(err)
		}
		nearRel(t, fmt.Sprintf("x=%d P(X>=x) at lower", x), 1-poissonCDF(x-1, iv.Lo), 0.025, 1e-9)
		nearRel(t, fmt.Sprintf("x=%d P(X<=x) at upper", x), poissonCDF(x, iv.Hi), 0.025, 1e-9)
	}
}

func TestPoissonRate(t *testing.T) {
	rate, ci, err := PoissonRate(10, 4, 0.95)
	if err != nil {
		t.Fatal(err)
	}
	count, _ := PoissonCI(10, 0.95)
	near(t, "rate", rate, 2.5, 0)
	near(t, "lower", ci.Lo, count.Lo/4, 1e-15)
	near(t, "upper", ci.Hi, count.Hi/4, 1e-15)

	_, err = PoissonCI(-1, 0.95)
	wantInvalid(t, "negative count", err)
	_, err = PoissonCI(1, 1)
	wantInvalid(t, "conf 1", err)
	for _, exp := range []float64{0, -1, math.NaN(), math.Inf(1)} {
		_, _, err = PoissonRate(1, exp, 0.95)
		wantInvalid(t, fmt.Sprintf("exposure %v", exp), err)
	}
}

// chiSquareQuantile is the p-quantile of the chi-square distribution with k
// degrees of freedom, for the tests that hold our gamma function against
// a reference library in the form textbooks tabulate.
func chiSquareQuantile(p, k float64) float64 {
	if p < 0.5 {
		return 2 * gammaLowerQuantile(p, k/2)
	}
	return 2 * gammaUpperQuantile(1-p, k/2)
}
