package stats

import (
	"errors"
	"math"
	"testing"
)

// near fails the test when got and want differ by more than tol.
func near(tb testing.TB, name string, got, want, tol float64) {
	tb.Helper()
	if math.IsNaN(got) || math.Abs(got-want) > tol {
		tb.Errorf("%s = %.10g, want %.10g (+-%g)", name, got, want, tol)
	}
}

// nearRel fails the test when got and want differ by more than a relative tol.
func nearRel(tb testing.TB, name string, got, want, tol float64) {
	tb.Helper()
	if math.IsNaN(got) || math.Abs(got-want) > tol*math.Max(math.Abs(want), math.SmallestNonzeroFloat64) {
		tb.Errorf("%s = %.15g, want %.15g (relative %g)", name, got, want, tol)
	}
}

// round4 rounds to four decimals, the precision of Newcombe's Table I.
func round4(v float64) float64 { return math.Round(v*1e4) / 1e4 }

// wantInvalid fails unless err wraps ErrInvalid.
func wantInvalid(tb testing.TB, name string, err error) {
	tb.Helper()
	if !errors.Is(err, ErrInvalid) {
		tb.Errorf("%s: err = %v, want ErrInvalid", name, err)
	}
}
