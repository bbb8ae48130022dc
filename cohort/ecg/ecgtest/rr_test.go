package ecgtest

import (
	"math"
	"testing"
)

// nrmssd is RMSSD / mean RR, computed here so this test does not lean on
// package rr.
func nrmssd(rr []float64) float64 {
	s, m := 0.0, 0.0
	for i, v := range rr {
		m += v
		if i > 0 {
			s += (v - rr[i-1]) * (v - rr[i-1])
		}
	}
	return math.Sqrt(s/float64(len(rr)-1)) / (m / float64(len(rr)))
}

func TestRRGenerators(t *testing.T) {
	const n = 4000
	sinus := SinusRR(n, 800, 1)
	af := AFRR(n, 750, 1)
	mean := func(x []float64) float64 {
		s := 0.0
		for _, v := range x {
			s += v
		}
		return s / float64(len(x))
	}
	if m := mean(sinus); math.Abs(m-800) > 8 {
		t.Errorf("sinus mean %.1f ms, want 800 +- 8", m)
	}
	if m := mean(af); math.Abs(m-750) > 20 {
		t.Errorf("AF mean %.1f ms, want 750 +- 20", m)
	}
	// The beat-interval method calls a segment irregular above a normalised
	// RMSSD of 0.1 (rr-api.md, from memory): the sinus series must sit well
	// below, the AF series well above.
	if v := nrmssd(sinus); v > 0.05 {
		t.Errorf("sinus normalised RMSSD %.3f, want < 0.05", v)
	}
	if v := nrmssd(af); v < 0.2 {
		t.Errorf("AF normalised RMSSD %.3f, want > 0.2", v)
	}
	// AF intervals are independent: the lag-1 autocorrelation of n
	// independent values has a standard error of about 1/sqrt(n) = 0.016.
	m := mean(af)
	num, den := 0.0, 0.0
	for i, v := range af {
		den += (v - m) * (v - m)
		if i > 0 {
			num += (v - m) * (af[i-1] - m)
		}
	}
	if r := num / den; math.Abs(r) > 0.06 {
		t.Errorf("AF lag-1 autocorrelation %.3f, want near 0", r)
	}
	for _, v := range af {
		if v < 0.45*750-1e-9 || v > 2.2*750+1e-9 {
			t.Fatalf("AF interval %.1f ms outside the clip range", v)
		}
	}
}
