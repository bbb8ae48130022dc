package ecg

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
)

// Wave is one Gaussian event (P, Q, R, S or T) of the dynamical ECG model: it
// sits at phase Theta (radians, R at 0) with amplitude A and width B
// (radians).
type Wave struct {
	Name     string
	Theta, A float64
	B        float64
}

// Table1Waves returns the P, Q, R, S and T events of McSharry PE, Clifford GD,
// Tarassenko L, Smith LA. A dynamical model for generating synthetic
// electrocardiogram signals. IEEE Trans Biomed Eng 2003;50(3):289-94, Table 1
// (verified, secondary). We use the table's angles (-pi/3, -pi/12, 0, pi/12,
// pi/2), not the -70, -15, 0, 15, 100 degrees of the authors' program.
func Table1Waves() []Wave {
	return []Wave{
		{"P", -math.Pi / 3, 1.2, 0.25},
		{"Q", -math.Pi / 12, -5.0, 0.1},
		{"R", 0, 30.0, 0.1},
		{"S", math.Pi / 12, -7.5, 0.1},
		{"T", math.Pi / 2, 0.75, 0.4},
	}
}

// SynthOptions steer Synthesize. Zero values take the defaults shown.
type SynthOptions struct {
	RateHz      float64 // output sampling rate; default 500
	AmplitudeMV float64 // R-wave height above the local baseline; default 1
	Waves       []Wave  // default Table1Waves()
	// LiteralAmplitude integrates the published z equation unchanged. Its
	// forcing does not scale with the angular speed, so every wave's height
	// is proportional to the RR interval that contains it (a beat after a
	// 1.6 s pause is twice as tall as one after 0.8 s). By default we multiply
	// the forcing by omega/2pi, which leaves the model unchanged at 60 bpm
	// (where Table 1 was set) and makes the morphology a function of phase
	// alone, as in a real AF tracing where R height barely follows the RR.
	// With LiteralAmplitude, AmplitudeMV holds at 60 bpm only.
	LiteralAmplitude bool
	// WanderMV and WanderHz add baseline wander, a sinusoid with a random
	// phase (breathing moves the baseline at 0.15-0.3 Hz).
	WanderMV, WanderHz float64
	// Noise adds white Gaussian noise (a stand-in for muscle noise) at SNRdB:
	// the ratio of the clean ECG's variance to the noise variance, in dB.
	Noise bool
	SNRdB float64
	// Seed makes the wander phase and the noise reproducible.
	Seed uint64
	// FirstBeatS and Seconds place the beats in a recording of a given
	// length: the first R peak FirstBeatS seconds after the first sample
	// (default: half of rr[0]) and Seconds of samples in all, exactly
	// round(Seconds*RateHz) of them (default: up to half of the last
	// interval after the last R peak, and one sample more). With Seconds
	// the time after the last R peak is the start of an interval that the
	// recording cuts off: the phase runs at the last interval's speed, slower
	// when the tail is longer than that interval, and never reaches another
	// QRS. A scripted recording of exactly 30 s then lasts 30 s, not a few
	// samples less, which matters to the 30 s rule (MinDiagnosticSeconds).
	FirstBeatS, Seconds float64
	// BeatWaves gives some beats a shape of their own: beat k (0-based,
	// the R peak at RTimes[k]) is drawn with BeatWaves[k] instead of Waves,
	// for example a premature ventricular beat with a wide QRS and no P
	// wave. A beat's shape holds from halfway after the previous R peak to
	// halfway to the next, where the phase passes pi and every wave of
	// either shape has died away. The amplitude scale is set by Waves.
	BeatWaves map[int][]Wave
}

// Synthetic is a generated recording with its ground truth.
type Synthetic struct {
	Waveform Waveform  // ECG with wander and noise, mV
	Clean    []float64 // the same without wander and noise, mV
	// RTimes are the true R-peak times in seconds from the first sample:
	// the moments the model's phase crosses the R wave's angle.
	RTimes []float64
}

// maxStep bounds the RK4 step: 1 ms keeps the phase error of the limit cycle
// below 1e-9 rad per beat at 200 bpm.
const maxStep = 1e-3

// Synthesize integrates the dynamical model with the classical fourth-order
// Runge-Kutta method, taking the RR intervals (ms) as input. The angular speed
// is piecewise constant (see the comment in the code: every QRS is drawn at
// the speed of the mean RR, the rest of each cycle fills the time left), the
// integration steps stop at every change of speed, and so the R peaks fall
// exactly rr[k] apart. McSharry et al. let the speed follow a continuous RR
// tachogram instead, which neither reproduces given intervals exactly nor
// keeps the QRS width when the rate changes. Every interval must exceed a
// quarter of the mean. The recording starts
// half of rr[0] before the first R peak and ends half of the last interval
// after the last one, so len(rr) intervals give len(rr)+1 beats. The model is
// first run for 5 s of rr[0] cycles so that z starts on its cycle, not at 0.
//
// The model (McSharry et al. 2003, eq. 3): x' = ax - wy, y' = ay + wx with
// a = 1 - sqrt(x^2+y^2), z' = -sum_i a_i dtheta_i exp(-dtheta_i^2/(2 b_i^2))
// - z, dtheta_i = (theta - theta_i) mod 2pi; see SynthOptions.LiteralAmplitude
// for the one change we make by default.
func Synthesize(rrMs []float64, o SynthOptions) (Synthetic, error) {
	return synthesize(rrMs, o, maxStep)
}

func synthesize(rrMs []float64, o SynthOptions, hMax float64) (Synthetic, error) {
	if len(rrMs) == 0 {
		return Synthetic{}, errors.New("ecg: synthesize: no RR intervals")
	}
	for i, v := range rrMs {
		if math.IsNaN(v) || v < 100 || v > 10000 {
			return Synthetic{}, fmt.Errorf("ecg: synthesize: rr[%d] = %g ms, want 100-10000 ms", i, v)
		}
	}
	fs := o.RateHz
	if fs == 0 {
		fs = 500
	}
	if math.IsNaN(fs) || fs < 50 || fs > 10000 {
		return Synthetic{}, fmt.Errorf("ecg: synthesize: rate %g Hz, want 50-10000 Hz", fs)
	}
	amp := o.AmplitudeMV
	if amp == 0 {
		amp = 1
	}
	waves := o.Waves
	if len(waves) == 0 {
		waves = Table1Waves()
	}
	// The R wave is the event with the largest area a*b^2; its height on
	// the phase axis is about a*b^2 / 2pi with our normalisation.
	var peak float64
	for _, wv := range waves {
		if math.Abs(wv.A*wv.B*wv.B) > math.Abs(peak) {
			peak = wv.A * wv.B * wv.B
		}
	}
	if peak == 0 {
		return Synthetic{}, errors.New("ecg: synthesize: waves have no amplitude")
	}
	scale := amp * 2 * math.Pi / peak

	// R-peak times (s), from half the first interval on (or FirstBeatS).
	n := len(rrMs)
	rT := make([]float64, n+1)
	rT[0] = rrMs[0] / 2000
	if o.FirstBeatS != 0 {
		if !(o.FirstBeatS > 0 && o.FirstBeatS < 10) {
			return Synthetic{}, fmt.Errorf("ecg: synthesize: first beat at %g s, want more than 0 and under 10 s", o.FirstBeatS)
		}
		rT[0] = o.FirstBeatS
	}
	for k := 0; k < n; k++ {
		rT[k+1] = rT[k] + rrMs[k]/1000
	}
	total := rT[n] + rrMs[n-1]/2000
	ns := int(math.Floor(total*fs)) + 1
	if float64(ns-1)/fs > total {
		ns--
	}
	if o.Seconds != 0 {
		// The scripted length may end on the last beat; allow for the
		// rounding of summing the intervals.
		if !(o.Seconds >= rT[n]-1e-9 && o.Seconds <= MaxRecordingSeconds) {
			return Synthetic{}, fmt.Errorf("ecg: synthesize: %g s of recording, want the last beat (at %g s) inside and at most %d s", o.Seconds, rT[n], MaxRecordingSeconds)
		}
		total = o.Seconds
		ns = int(math.Round(total * fs))
	}

	// The phase speed is piecewise constant. Around every R peak (|theta| <
	// pi/4, wider than the QRS) it is 2pi over the mean RR, so all QRS
	// complexes have the same width and are symmetric about their R peak, as
	// in a tracing whose QRS duration does not follow the rate. Between those
	// windows it is whatever makes the phase advance by 3pi/2 in the time
	// left, so R peak k+1 falls exactly rr[k] after R peak k; the P and T
	// waves stretch and shrink with the interval.
	meanRR := 0.0
	for _, v := range rrMs {
		meanRR += v / 1000
	}
	meanRR /= float64(n)
	wQRS := 2 * math.Pi / meanRR
	wR := func(int) float64 { return wQRS }
	// Each segment also names the beat whose shape it draws; the speed is
	// constant across the halfway point where one beat's shape gives way
	// to the next, so that point splits a segment without changing it.
	type seg struct {
		end, w float64
		beat   int
	}
	var segs []seg
	q0 := math.Pi / 4 / wR(0)
	if rT[0] <= q0 {
		return Synthetic{}, fmt.Errorf("ecg: synthesize: first beat at %g s is inside its own QRS (%g s from the start at least)", rT[0], q0)
	}
	lead := 0.75 * math.Pi / (rT[0] - q0) // from -pi at t = 0 to -pi/4
	segs = append(segs, seg{rT[0] - q0, lead, 0}, seg{rT[0] + q0, wR(0), 0})
	for k := 0; k < n; k++ {
		a, b := math.Pi/4/wR(k), math.Pi/4/wR(k+1)
		mid := rrMs[k]/1000 - a - b
		if mid <= 0 {
			return Synthetic{}, fmt.Errorf("ecg: synthesize: rr[%d] = %g ms is not above a quarter of the mean RR, %g ms", k, rrMs[k], 1000*meanRR)
		}
		w := 1.5 * math.Pi / mid
		half := rT[k] + a + (0.75*math.Pi)/w // the phase passes pi here
		segs = append(segs, seg{half, w, k}, seg{rT[k+1] - b, w, k + 1}, seg{rT[k+1] + b, wR(k + 1), k + 1})
	}
	tail := wR(n)
	if o.Seconds != 0 {
		// After the last QRS the phase runs as between beats of the last
		// interval; a tail longer than that interval's span between QRS
		// windows runs slower, to 90% of it, so no further QRS begins.
		mid := segs[len(segs)-2].w
		if left := total - segs[len(segs)-1].end; left > 0 && mid*left >= 1.5*math.Pi {
			mid = 0.9 * 1.5 * math.Pi / left
		}
		tail = mid
	}
	segs = append(segs, seg{math.Inf(1), tail, n})
	for k, bw := range o.BeatWaves {
		if k < 0 || k > n {
			return Synthetic{}, fmt.Errorf("ecg: synthesize: beat %d has its own waves, but there are beats 0-%d", k, n)
		}
		if len(bw) == 0 {
			return Synthetic{}, fmt.Errorf("ecg: synthesize: beat %d has an empty list of waves", k)
		}
	}
	wavesOf := func(beat int) []Wave {
		if bw, ok := o.BeatWaves[beat]; ok {
			return bw
		}
		return waves
	}

	deriv := func(s [3]float64, w float64, waves []Wave) [3]float64 {
		x, y, z := s[0], s[1], s[2]
		r := math.Hypot(x, y)
		a := 1 - r
		th := math.Atan2(y, x)
		f := 0.0
		for _, wv := range waves {
			dth := th - wv.Theta // both in [-pi, pi]: one wrap is enough
			if dth > math.Pi {
				dth -= 2 * math.Pi
			} else if dth < -math.Pi {
				dth += 2 * math.Pi
			}
			// Beyond e^-40 a wave adds less than rounding error; skip it.
			if e := dth * dth / (2 * wv.B * wv.B); e < 40 {
				f -= wv.A * dth * math.Exp(-e)
			}
		}
		if !o.LiteralAmplitude {
			f *= w / (2 * math.Pi)
		}
		return [3]float64{a*x - w*y, a*y + w*x, f - z}
	}
	rk4 := func(s [3]float64, w, h float64, waves []Wave) [3]float64 {
		k1 := deriv(s, w, waves)
		k2 := deriv([3]float64{s[0] + h/2*k1[0], s[1] + h/2*k1[1], s[2] + h/2*k1[2]}, w, waves)
		k3 := deriv([3]float64{s[0] + h/2*k2[0], s[1] + h/2*k2[1], s[2] + h/2*k2[2]}, w, waves)
		k4 := deriv([3]float64{s[0] + h*k3[0], s[1] + h*k3[1], s[2] + h*k3[2]}, w, waves)
		for i := range s {
			s[i] += h / 6 * (k1[i] + 2*k2[i] + 2*k3[i] + k4[i])
		}
		return s
	}
	// advance integrates over a span of constant angular speed in equal steps
	// no longer than hMax.
	advance := func(s [3]float64, w, span float64, waves []Wave) [3]float64 {
		if span <= 0 {
			return s
		}
		steps := int(math.Ceil(span / hMax))
		h := span / float64(steps)
		for range steps {
			s = rk4(s, w, h, waves)
		}
		return s
	}

	// Warm-up: 5 s at the lead-in speed, ending at phase -pi at t = 0.
	const warm = 5.0
	th0 := -math.Pi - lead*warm
	s := advance([3]float64{math.Cos(th0), math.Sin(th0), 0}, lead, warm, waves)

	clean := make([]float64, ns)
	t := 0.0
	j := 0 // segment in force
	for i := range ns {
		ti := float64(i) / fs
		for segs[j].end <= ti {
			s = advance(s, segs[j].w, segs[j].end-t, wavesOf(segs[j].beat))
			t = segs[j].end
			j++
		}
		s = advance(s, segs[j].w, ti-t, wavesOf(segs[j].beat))
		t = ti
		clean[i] = s[2] * scale
	}

	out := make([]float64, ns)
	copy(out, clean)
	rng := rand.New(rand.NewPCG(o.Seed, 0x5eed0ec6))
	if o.WanderMV != 0 && o.WanderHz > 0 {
		ph := 2 * math.Pi * rng.Float64()
		for i := range out {
			out[i] += o.WanderMV * math.Sin(2*math.Pi*o.WanderHz*float64(i)/fs+ph)
		}
	}
	if o.Noise {
		m, v := 0.0, 0.0
		for _, c := range clean {
			m += c
		}
		m /= float64(ns)
		for _, c := range clean {
			v += (c - m) * (c - m)
		}
		v /= float64(ns)
		sd := math.Sqrt(v / math.Pow(10, o.SNRdB/10))
		for i := range out {
			out[i] += sd * rng.NormFloat64()
		}
	}
	src := fmt.Sprintf("synthetic (dynamical model), %g Hz, %d beats", fs, n+1)
	if o.WanderMV != 0 {
		src += fmt.Sprintf(", wander %g mV at %g Hz", o.WanderMV, o.WanderHz)
	}
	if o.Noise {
		src += fmt.Sprintf(", white noise at %g dB SNR", o.SNRdB)
	}
	return Synthetic{
		Waveform: Waveform{Samples: out, RateHz: fs, Label: "ECG", Source: src},
		Clean:    clean,
		RTimes:   rT,
	}, nil
}
