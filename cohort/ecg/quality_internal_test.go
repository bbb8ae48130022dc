package ecg

import (
	"math/rand/v2"
	"slices"
	"testing"
)

// nthSmallest agrees with sorting on random slices with repeated values.
func TestNthSmallest(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	for n := 1; n < 60; n++ {
		for range 20 {
			x := make([]float64, n)
			for i := range x {
				x[i] = float64(rng.IntN(7))
			}
			sorted := slices.Sorted(slices.Values(x))
			k := rng.IntN(n)
			if got := nthSmallest(slices.Clone(x), k); got != sorted[k] {
				t.Fatalf("%v: element %d = %v, want %v", x, k, got, sorted[k])
			}
		}
	}
}
