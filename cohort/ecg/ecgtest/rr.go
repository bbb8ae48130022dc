package ecgtest

import (
	"math"
	"math/rand/v2"
)

// SinusRR makes n RR intervals (ms) of a sinus-like rhythm around meanMs:
// respiratory sinus arrhythmia as a 0.25 Hz sinusoid of 4% amplitude plus
// independent Gaussian jitter of 1% (our choices: 15 breaths a minute, a
// modest modulation). The normalised RMSSD stays near 0.03, well inside
// a regular rhythm.
func SinusRR(n int, meanMs float64, seed uint64) []float64 {
	rng := rand.New(rand.NewPCG(seed, 0x517e5))
	ph := 2 * math.Pi * rng.Float64()
	out := make([]float64, n)
	t := 0.0
	for i := range out {
		v := meanMs * (1 + 0.04*math.Sin(2*math.Pi*0.25*t+ph) + 0.01*rng.NormFloat64())
		out[i] = v
		t += v / 1000
	}
	return out
}

// AFRR makes n independent RR intervals (ms) as in atrial fibrillation:
// log-normal around meanMs with a coefficient of variation of about 0.25,
// clipped to [0.45, 2.2] x meanMs and never below 250 ms (our choices: an
// irregularly irregular ventricular response without short-long patterns).
func AFRR(n int, meanMs float64, seed uint64) []float64 {
	rng := rand.New(rand.NewPCG(seed, 0xaf))
	const sigma = 0.25
	out := make([]float64, n)
	for i := range out {
		v := meanMs * math.Exp(sigma*rng.NormFloat64()-sigma*sigma/2)
		out[i] = math.Max(math.Max(v, 0.45*meanMs), 250)
		out[i] = math.Min(out[i], 2.2*meanMs)
	}
	return out
}
