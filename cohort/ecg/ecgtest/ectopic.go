package ecgtest

import (
	"fmt"
	"math"
	"math/rand/v2"

	"cohortdesk/cohort/ecg"
)

// PVCWaves is the shape of a premature ventricular beat for ecg.Synthesize
// (SynthOptions.BeatWaves): no P wave, a wide QRS (the R and S events about
// two and a half times the width of Table 1's), taller than a normal beat,
// and a T wave opposite to it. Our own choice of events, drawn to look like
// a textbook premature ventricular beat: QRS about 150 ms wide at 75 bpm.
func PVCWaves() []ecg.Wave {
	return []ecg.Wave{
		{Name: "R", Theta: -math.Pi / 20, A: 9.0, B: 0.22},
		{Name: "S", Theta: math.Pi / 7, A: -5.0, B: 0.18},
		{Name: "T", Theta: math.Pi / 2, A: -1.1, B: 0.45},
	}
}

// Ectopy is a synthetic rhythm with premature beats: the RR intervals (ms)
// for ecg.Synthesize and the indices of the premature beats (beat k is the
// R peak at Synthetic.RTimes[k]).
type Ectopy struct {
	RR        []float64
	Premature []int
}

// BeatWaves gives every premature beat the PVC shape.
func (e Ectopy) BeatWaves() map[int][]ecg.Wave {
	m := make(map[int][]ecg.Wave, len(e.Premature))
	for _, k := range e.Premature {
		m[k] = PVCWaves()
	}
	return m
}

// Premature-beat timing (ours, textbook figures): a premature beat comes at
// 55% of the underlying cycle and is followed by a full compensatory pause,
// so the interval before it and the one after add up to two cycles.
const couplingShare = 0.55

// EctopicRR builds n RR intervals of sinus rhythm around meanMs (SinusRR)
// with premature ventricular beats in a pattern: "bigeminy" (every second
// beat), "trigeminy" (every third) or "frequent" (isolated beats at random,
// about one in seven, never two in a row). Beat 0 is always a normal beat.
func EctopicRR(pattern string, n int, meanMs float64, seed uint64) (Ectopy, error) {
	base := SinusRR(n, meanMs, seed)
	var every int
	switch pattern {
	case "bigeminy":
		every = 2
	case "trigeminy":
		every = 3
	case "frequent":
	default:
		return Ectopy{}, fmt.Errorf("ecgtest: unknown pattern %q (bigeminy, trigeminy, frequent)", pattern)
	}
	rng := rand.New(rand.NewPCG(seed, 0xec70))
	var e Ectopy
	rr := append([]float64(nil), base...)
	last := -10
	for k := 1; k < n; k++ { // beat k ends interval k-1 and starts interval k
		premature := false
		if every > 0 {
			premature = k%every == 0
		} else {
			premature = k-last > 2 && rng.Float64() < 1.0/7
		}
		if !premature {
			continue
		}
		cycle := base[k-1]
		rr[k-1] = couplingShare * cycle
		rr[k] = (2 - couplingShare) * cycle
		e.Premature = append(e.Premature, k)
		last = k
	}
	e.RR = rr
	return e, nil
}

// AFWithPVC builds n AF intervals (AFRR) with an occasional premature
// ventricular beat: about one in twenty, at 60% of the interval before it,
// followed by a pause of 1.4 times it (ours: in AF there is no regular
// cycle to compensate, only a short-long pair).
func AFWithPVC(n int, meanMs float64, seed uint64) Ectopy {
	rr := AFRR(n, meanMs, seed)
	rng := rand.New(rand.NewPCG(seed, 0xaf5))
	var e Ectopy
	last := -10
	for k := 2; k < n; k++ {
		if k-last < 4 || rng.Float64() >= 1.0/20 {
			continue
		}
		prev := rr[k-1]
		rr[k-1] = math.Max(0.6*prev, 300)
		rr[k] = 1.4 * prev
		e.Premature = append(e.Premature, k)
		last = k
	}
	e.RR = rr
	return e
}

// The artefacts a test injects into a recording. Each replaces the samples
// of [from, to) seconds of w (in place) and returns the sample range.

// InjectFlat holds the signal at level mV: a dead input.
func InjectFlat(w *ecg.Waveform, from, to, level float64) (int, int) {
	i0, i1 := span(w, from, to)
	for i := i0; i < i1; i++ {
		w.Samples[i] = level
	}
	return i0, i1
}

// InjectSaturation drives the signal to the limit railMV and holds it
// there, with a 50 ms swing in and out, as an overloaded amplifier does.
func InjectSaturation(w *ecg.Waveform, from, to, railMV float64) (int, int) {
	i0, i1 := span(w, from, to)
	ramp := max(1, int(0.05*w.RateHz))
	for i := i0; i < i1; i++ {
		f := 1.0
		if d := i - i0; d < ramp {
			f = float64(d) / float64(ramp)
		}
		if d := i1 - 1 - i; d < ramp {
			f = math.Min(f, float64(d)/float64(ramp))
		}
		w.Samples[i] = w.Samples[i] + f*(railMV-w.Samples[i])
	}
	return i0, i1
}

// InjectLeadOff lifts the baseline by stepMV, decaying with a 1 s time
// constant as an AC-coupled input does, and replaces the ECG with 50 Hz
// mains hum of 0.3 mV: an electrode that has lost the skin.
func InjectLeadOff(w *ecg.Waveform, from, to, stepMV float64) (int, int) {
	i0, i1 := span(w, from, to)
	for i := i0; i < i1; i++ {
		t := float64(i-i0) / w.RateHz
		w.Samples[i] = stepMV*math.Exp(-t/1.0) + 0.3*math.Sin(2*math.Pi*50*t)
	}
	return i0, i1
}

// InjectMotion adds electrode-motion noise: white noise band-limited to
// about 1-12 Hz (two-pole filters), scaled so its peak-to-peak is ppMV.
// It overlaps the QRS band, as motion artefact does.
func InjectMotion(w *ecg.Waveform, from, to, ppMV float64, seed uint64) (int, int) {
	i0, i1 := span(w, from, to)
	rng := rand.New(rand.NewPCG(seed, 0x40710))
	fs := w.RateHz
	noise := make([]float64, i1-i0)
	lo := math.Exp(-2 * math.Pi * 12 / fs) // low-pass at 12 Hz
	hi := math.Exp(-2 * math.Pi * 1 / fs)  // high-pass at 1 Hz
	var a, b, c, d float64
	for i := range noise {
		v := rng.NormFloat64()
		a = lo*a + (1-lo)*v
		b = lo*b + (1-lo)*a
		c = hi*c + (1-hi)*b
		d = hi*d + (1-hi)*c
		noise[i] = b - d
	}
	mn, mx := math.Inf(1), math.Inf(-1)
	for _, v := range noise {
		mn, mx = min(mn, v), max(mx, v)
	}
	scale := ppMV / (mx - mn)
	for i, v := range noise {
		w.Samples[i0+i] += v * scale
	}
	return i0, i1
}

func span(w *ecg.Waveform, from, to float64) (int, int) {
	i0 := max(0, int(math.Round(from*w.RateHz)))
	i1 := min(len(w.Samples), int(math.Round(to*w.RateHz)))
	return i0, i1
}
