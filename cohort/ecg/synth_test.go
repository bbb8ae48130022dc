package ecg_test

import (
	"cohortdesk/cohort/ecg"
	"cohortdesk/cohort/ecg/ecgtest"
	"math"
	"slices"
	"testing"
)

func TestTable1Waves(t *testing.T) {
	// McSharry et al. 2003, Table 1 (verified, secondary; check-values.md).
	want := []ecg.Wave{
		{"P", -math.Pi / 3, 1.2, 0.25},
		{"Q", -math.Pi / 12, -5.0, 0.1},
		{"R", 0, 30.0, 0.1},
		{"S", math.Pi / 12, -7.5, 0.1},
		{"T", math.Pi / 2, 0.75, 0.4},
	}
	if got := ecg.Table1Waves(); !slices.Equal(got, want) {
		t.Errorf("got %v, want %v", got, want)
	}
}

func TestSynthesizeRPeaksAtTrueTimes(t *testing.T) {
	rr := ecgtest.AFRR(40, 700, 11)
	const fs = 1000
	s := mustSynth(t, rr, ecg.SynthOptions{RateHz: fs})
	if len(s.RTimes) != len(rr)+1 {
		t.Fatalf("got %d R times, want %d", len(s.RTimes), len(rr)+1)
	}
	for k, v := range rr {
		if got := 1000 * (s.RTimes[k+1] - s.RTimes[k]); math.Abs(got-v) > 1e-9 {
			t.Errorf("interval %d: got %.12f ms, want %.12f ms", k, got, v)
		}
	}
	// Independently of the detector: the clean signal's maximum within
	// +-100 ms of each true time, refined by a parabola, lies within 0.5 ms
	// of it. (It is not exactly on it: the -z damping term and the unequal Q
	// and S waves move the maximum of z a fraction of a millisecond off the
	// R wave's phase.)
	for k, rt := range s.RTimes {
		c := int(math.Round(rt * fs))
		best := c
		for i := max(c-100, 1); i <= min(c+100, len(s.Clean)-2); i++ {
			if s.Clean[i] > s.Clean[best] {
				best = i
			}
		}
		y0, y1, y2 := s.Clean[best-1], s.Clean[best], s.Clean[best+1]
		peak := (float64(best) + 0.5*(y0-y2)/(y0-2*y1+y2)) / fs
		if math.Abs(peak-rt) > 0.0005 {
			t.Errorf("beat %d: maximum at %.5f s, true R peak at %.5f s", k, peak, rt)
		}
	}
}

func TestSynthesizeRK4Order(t *testing.T) {
	// The classical Runge-Kutta method is fourth order: halving the step
	// divides the error by about 16 (a property of the method, computed).
	// With steps h, h/2 against a reference at h/8, the ratio of the two
	// differences is (1 - 8^-4) / (2^-4 - 8^-4), about 16.
	// A constant 800 ms RR at 100 Hz puts every change of phase speed on the
	// sample grid, so halving hMax halves every step.
	rr := []float64{800, 800, 800, 800, 800, 800}
	o := ecg.SynthOptions{RateHz: 100}
	run := func(h float64) []float64 {
		s, err := ecg.SynthesizeStep(rr, o, h)
		if err != nil {
			t.Fatal(err)
		}
		return s.Clean
	}
	ref := run(0.01 / 8)
	diff := func(a []float64) float64 {
		d := 0.0
		for i := range a {
			d = math.Max(d, math.Abs(a[i]-ref[i]))
		}
		return d
	}
	d1, d2 := diff(run(0.01)), diff(run(0.005))
	want := (1 - math.Pow(8, -4)) / (math.Pow(2, -4) - math.Pow(8, -4))
	ratio := d1 / d2
	t.Logf("error ratio %.2f (errors %.3g, %.3g), expected %.2f", ratio, d1, d2, want)
	if math.Abs(ratio-want)/want > 0.15 {
		t.Errorf("error ratio %.2f (errors %.3g, %.3g), want about %.1f", ratio, d1, d2, want)
	}
}

func TestSynthesizeAmplitudeAndNoise(t *testing.T) {
	rr := ecgtest.SinusRR(100, 800, 13)
	s := mustSynth(t, rr, ecg.SynthOptions{RateHz: 500, Noise: true, SNRdB: 10, Seed: 3})
	// R height above the isoelectric level (the median) is about 1 mV.
	base := ecg.Median(s.Clean)
	for k, rt := range s.RTimes {
		h := s.Clean[int(math.Round(rt*500))] - base
		if math.Abs(h-1) > 0.1 {
			t.Errorf("beat %d: R height %.3f mV, want 1 +- 0.1", k, h)
		}
	}
	// Noise variance = clean variance / 10^(SNR/10).
	varOf := func(x []float64) float64 {
		m := 0.0
		for _, v := range x {
			m += v
		}
		m /= float64(len(x))
		s := 0.0
		for _, v := range x {
			s += (v - m) * (v - m)
		}
		return s / float64(len(x))
	}
	noise := make([]float64, len(s.Clean))
	for i := range noise {
		noise[i] = s.Waveform.Samples[i] - s.Clean[i]
	}
	want := varOf(s.Clean) / 10
	if got := varOf(noise); math.Abs(got-want)/want > 0.05 {
		t.Errorf("noise variance %.4g, want %.4g", got, want)
	}
}

func TestSynthesizeWanderAndSeed(t *testing.T) {
	rr := ecgtest.SinusRR(20, 800, 14)
	o := ecg.SynthOptions{RateHz: 250, WanderMV: 0.25, WanderHz: 0.2, Noise: true, SNRdB: 20, Seed: 5}
	a, b := mustSynth(t, rr, o), mustSynth(t, rr, o)
	if !slices.Equal(a.Waveform.Samples, b.Waveform.Samples) {
		t.Error("the same seed gave different signals")
	}
	o.Seed = 6
	if c := mustSynth(t, rr, o); slices.Equal(a.Waveform.Samples, c.Waveform.Samples) {
		t.Error("different seeds gave the same signal")
	}
	// Without noise, the difference from the clean signal is the wander: a
	// sinusoid of the given amplitude.
	o.Noise = false
	w := mustSynth(t, rr, o)
	peak := 0.0
	for i := range w.Clean {
		peak = math.Max(peak, math.Abs(w.Waveform.Samples[i]-w.Clean[i]))
	}
	if math.Abs(peak-0.25) > 0.005 {
		t.Errorf("wander amplitude %.4f mV, want 0.25", peak)
	}
}

func TestSynthesizeRefuses(t *testing.T) {
	tests := []struct {
		name string
		rr   []float64
		o    ecg.SynthOptions
	}{
		{"no intervals", nil, ecg.SynthOptions{}},
		{"NaN interval", []float64{800, math.NaN()}, ecg.SynthOptions{}},
		{"interval too short", []float64{800, 50}, ecg.SynthOptions{}},
		{"interval under a quarter of the mean", []float64{2000, 2000, 2000, 300}, ecg.SynthOptions{}},
		{"rate too low", []float64{800}, ecg.SynthOptions{RateHz: 10}},
		{"no waves with amplitude", []float64{800}, ecg.SynthOptions{Waves: []ecg.Wave{{"R", 0, 0, 0.1}}}},
		{"length ends before the last beat", []float64{800, 800}, ecg.SynthOptions{FirstBeatS: 0.5, Seconds: 2}},
		{"first beat inside its own QRS", []float64{800, 800}, ecg.SynthOptions{FirstBeatS: 0.05}},
		{"negative first beat", []float64{800}, ecg.SynthOptions{FirstBeatS: -1}},
	}
	for _, tt := range tests {
		if _, err := ecg.Synthesize(tt.rr, tt.o); err == nil {
			t.Errorf("%s: got no error", tt.name)
		}
	}
}

func TestSynthesizeLiteralAmplitude(t *testing.T) {
	// The published z equation has no speed factor, so the R height grows
	// with the interval: at 120 bpm it is about half the height at 60 bpm
	// (dz/dtheta = -sum a dtheta exp(...) / omega).
	height := func(rrMs float64) float64 {
		s := mustSynth(t, []float64{rrMs, rrMs, rrMs, rrMs}, ecg.SynthOptions{RateHz: 1000, LiteralAmplitude: true})
		return s.Clean[int(math.Round(s.RTimes[2]*1000))] - ecg.Median(s.Clean)
	}
	slow, fast := height(1000), height(500)
	if r := fast / slow; math.Abs(r-0.5) > 0.05 {
		t.Errorf("height ratio 120/60 bpm %.3f, want about 0.5", r)
	}
	if math.Abs(slow-1) > 0.1 {
		t.Errorf("height at 60 bpm %.3f mV, want about 1", slow)
	}
}

// TestSynthesizeScriptedLength: with FirstBeatS and Seconds the recording has
// exactly Seconds of samples (so a 30 s recording is 30 s to the 30 s rule,
// MinDiagnosticSeconds), the R peaks fall at FirstBeatS plus the intervals,
// and a tail longer than any interval (the recording cut off in a pause) holds
// no further R wave. The times are the inputs' sums (computed).
func TestSynthesizeScriptedLength(t *testing.T) {
	rr := ecgtest.AFRR(38, 700, 21)
	first := 0.4
	last := first
	for _, v := range rr {
		last += v / 1000
	}
	for _, tc := range []struct {
		name    string
		seconds float64
	}{
		{"ends on the last beat", last},
		{"ends 0.3 s after it", last + 0.3},
		{"ends 2.5 s after it, longer than any interval", last + 2.5},
		{"exactly 30 s", 30},
	} {
		if tc.seconds < last {
			continue
		}
		for _, fs := range []float64{250, 300, 1000} {
			s := mustSynth(t, rr, ecg.SynthOptions{RateHz: fs, FirstBeatS: first, Seconds: tc.seconds})
			if want := int(math.Round(tc.seconds * fs)); len(s.Waveform.Samples) != want {
				t.Errorf("%s at %g Hz: %d samples, want %d", tc.name, fs, len(s.Waveform.Samples), want)
			}
			if got := s.Waveform.Seconds(); math.Abs(got-tc.seconds) > 0.5/fs {
				t.Errorf("%s at %g Hz: lasts %g s, want %g", tc.name, fs, got, tc.seconds)
			}
			if s.RTimes[0] != first || math.Abs(s.RTimes[len(rr)]-last) > 1e-9 {
				t.Errorf("%s at %g Hz: R peaks from %g to %g s, want %g to %g", tc.name, fs, s.RTimes[0], s.RTimes[len(rr)], first, last)
			}
			// After the last QRS (50 ms on) the clean signal stays below half
			// the R height above the baseline: no beat was added in the tail.
			base := ecg.Median(s.Clean)
			for i := int(math.Ceil((last + 0.05) * fs)); i < len(s.Clean); i++ {
				if s.Clean[i]-base > 0.5 {
					t.Errorf("%s at %g Hz: %.2f mV at %.3f s, after the last beat", tc.name, fs, s.Clean[i]-base, float64(i)/fs)
					break
				}
			}
		}
	}
	if testing.Short() {
		return
	}
	// 30 s at 300 Hz is 9000 samples and the app's 30 s rule passes it.
	s := mustSynth(t, ecgtest.SinusRR(30, 950, 4), ecg.SynthOptions{RateHz: 300, FirstBeatS: 0.5, Seconds: 30})
	if got := s.Waveform.Seconds(); got < ecg.MinDiagnosticSeconds {
		t.Errorf("a 30 s recording lasts %g s, under the 30 s rule", got)
	}
}
