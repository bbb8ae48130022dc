package ecg_test

import (
	"cohortdesk/cohort/ecg"
	"cohortdesk/cohort/ecg/ecgtest"
	"errors"
	"fmt"
	"math"
	"testing"
)

// matchTolerance pairs a detected beat with a true one when they are at most
// 75 ms apart: the 150 ms matching window that beat-detector evaluation
// standards use (common practice, from memory).
const matchTolerance = 0.075

// accuracy is the result of matching detected beats to the truth.
type accuracy struct {
	tp, fn, fp          int
	se, ppv             float64 // sensitivity and positive predictivity, %
	meanAbsMs, maxAbsMs float64 // timing error of the matched beats
}

func (a accuracy) String() string {
	return fmt.Sprintf("Se %.2f%% +P %.2f%% (TP %d FN %d FP %d), timing error mean %.2f ms max %.2f ms",
		a.se, a.ppv, a.tp, a.fn, a.fp, a.meanAbsMs, a.maxAbsMs)
}

// matchBeats pairs sorted detected times with sorted true times one to one.
func matchBeats(tb testing.TB, truth, got []float64) accuracy {
	tb.Helper()
	var a accuracy
	i, j := 0, 0
	sum := 0.0
	for i < len(truth) && j < len(got) {
		dt := got[j] - truth[i]
		switch {
		case math.Abs(dt) <= matchTolerance:
			a.tp++
			sum += math.Abs(dt)
			a.maxAbsMs = math.Max(a.maxAbsMs, 1000*math.Abs(dt))
			i++
			j++
		case dt < 0:
			a.fp++
			j++
		default:
			a.fn++
			i++
		}
	}
	a.fn += len(truth) - i
	a.fp += len(got) - j
	a.se = 100 * float64(a.tp) / float64(a.tp+a.fn)
	a.ppv = 100 * float64(a.tp) / math.Max(1, float64(a.tp+a.fp))
	if a.tp > 0 {
		a.meanAbsMs = 1000 * sum / float64(a.tp)
	}
	return a
}

// mustSynth generates a recording or stops the test.
func mustSynth(tb testing.TB, rr []float64, o ecg.SynthOptions) ecg.Synthetic {
	tb.Helper()
	s, err := ecg.Synthesize(rr, o)
	if err != nil {
		tb.Fatal(err)
	}
	return s
}

// mustDetect runs the detector or stops the test.
func mustDetect(tb testing.TB, w ecg.Waveform) ecg.Detection {
	tb.Helper()
	d, err := ecg.Detect(w)
	if err != nil {
		tb.Fatal(err)
	}
	return d
}

func TestDetectAccuracySynthetic(t *testing.T) {
	type condition struct {
		name  string
		o     ecg.SynthOptions
		minPc float64 // required Se and +P, %
		maxMs float64 // required largest timing error, ms; 0 = not checked
	}
	conditions := []condition{
		// Clean signals: the brief's 99.5% (ours), and beats placed to within
		// half a sample at 250 Hz.
		{"clean", ecg.SynthOptions{}, 99.5, 2},
		{"wander", ecg.SynthOptions{WanderMV: 0.3, WanderHz: 0.25}, 99.5, 2},
		// Moderate noise: the 99.3% the detector reached on the MIT/BIH
		// arrhythmia database (Pan and Tompkins 1985, abstract verified),
		// rounded down to 99%.
		{"wander+noise 6 dB", ecg.SynthOptions{WanderMV: 0.3, WanderHz: 0.25, Noise: true, SNRdB: 6}, 99, 0},
		// Heavy noise, as strong as the ECG itself: a regression floor of
		// ours, below the 99.3-100% seen when it was set.
		{"wander+noise 0 dB", ecg.SynthOptions{WanderMV: 0.3, WanderHz: 0.25, Noise: true, SNRdB: 0}, 97, 0},
	}
	rhythms := []struct {
		name string
		rr   func(seed uint64) []float64
	}{
		{"sinus", func(seed uint64) []float64 { return ecgtest.SinusRR(300, 800, seed) }},
		{"AF-like", func(seed uint64) []float64 { return ecgtest.AFRR(300, 750, seed) }},
	}
	for _, fs := range []float64{250, 500} {
		for _, rh := range rhythms {
			for _, c := range conditions {
				t.Run(fmt.Sprintf("%g Hz %s %s", fs, rh.name, c.name), func(t *testing.T) {
					t.Parallel()
					for seed := uint64(1); seed <= 2; seed++ {
						o := c.o
						o.RateHz, o.Seed = fs, seed
						s := mustSynth(t, rh.rr(seed), o)
						d := mustDetect(t, s.Waveform)
						a := matchBeats(t, s.RTimes, d.Times)
						t.Logf("seed %d: %v, %d by search-back", seed, a, d.SearchBack)
						if a.se < c.minPc || a.ppv < c.minPc {
							t.Errorf("seed %d: %v; want Se and +P >= %g%%", seed, a, c.minPc)
						}
						if c.maxMs > 0 && a.maxAbsMs > c.maxMs {
							t.Errorf("seed %d: timing error up to %.2f ms, want <= %g ms", seed, a.maxAbsMs, c.maxMs)
						}
					}
				})
			}
		}
	}
}

func TestDetectOtherRates(t *testing.T) {
	// The 100-200 Hz path interpolates up, 1000 Hz and 2000 Hz filter and
	// come down; all must find every beat of a clean recording.
	for _, fs := range []float64{100, 128, 360, 1000, 2000} {
		s := mustSynth(t, ecgtest.SinusRR(60, 750, 4), ecg.SynthOptions{RateHz: fs, Seed: 4})
		d := mustDetect(t, s.Waveform)
		a := matchBeats(t, s.RTimes, d.Times)
		if a.fn+a.fp > 0 || a.maxAbsMs > 1000/fs {
			t.Errorf("%g Hz: %v; want all beats within one sample", fs, a)
		}
	}
}

func TestDetectInvertedLead(t *testing.T) {
	// A lead with a negative QRS: the polarity comes from the band-passed
	// signal, and the R peak becomes the trough.
	s := mustSynth(t, ecgtest.AFRR(80, 700, 5), ecg.SynthOptions{RateHz: 500, Seed: 5})
	for i := range s.Waveform.Samples {
		s.Waveform.Samples[i] = -s.Waveform.Samples[i]
	}
	a := matchBeats(t, s.RTimes, mustDetect(t, s.Waveform).Times)
	if a.fn+a.fp > 0 || a.maxAbsMs > 2 {
		t.Errorf("inverted: %v", a)
	}
}

func TestDetectRRAndHeartRate(t *testing.T) {
	rr := ecgtest.SinusRR(50, 900, 6)
	s := mustSynth(t, rr, ecg.SynthOptions{RateHz: 250, Seed: 6})
	d := mustDetect(t, s.Waveform)
	if len(d.RRms) != len(rr) {
		t.Fatalf("got %d intervals, want %d", len(d.RRms), len(rr))
	}
	sum := 0.0
	for i, want := range rr {
		sum += want
		if math.Abs(d.RRms[i]-want) > 2 {
			t.Errorf("RR %d: got %.2f ms, want %.2f ms", i, d.RRms[i], want)
		}
	}
	if want := 60000 / (sum / float64(len(rr))); math.Abs(d.MeanHR-want) > 0.2 {
		t.Errorf("mean HR: got %.3f, want %.3f", d.MeanHR, want)
	}
	for i, b := range d.Beats {
		if math.Abs(float64(b)/250-d.Times[i]) > 0.5/250 {
			t.Errorf("beat %d: index %d and time %g disagree", i, b, d.Times[i])
		}
	}
}

func TestDetectSearchBackAfterAmplitudeDrop(t *testing.T) {
	// The QRS shrinks to a fifth halfway through; the thresholds, tuned to
	// the tall beats, miss the small ones until search-back finds them and
	// the thresholds adapt.
	rr := ecgtest.SinusRR(80, 800, 7)
	s := mustSynth(t, rr, ecg.SynthOptions{RateHz: 500, Seed: 7})
	half := len(s.Waveform.Samples) / 2
	for i := half; i < len(s.Waveform.Samples); i++ {
		s.Waveform.Samples[i] *= 0.2
	}
	d := mustDetect(t, s.Waveform)
	a := matchBeats(t, s.RTimes, d.Times)
	if a.fn+a.fp > 0 {
		t.Errorf("%v", a)
	}
	if d.SearchBack == 0 {
		t.Error("no beat was found by search-back; the test no longer exercises it")
	}
}

func TestDetectTallTWaves(t *testing.T) {
	// T waves four times the Table 1 height must not be counted as beats.
	waves := ecg.Table1Waves()
	waves[4].A *= 4
	s := mustSynth(t, ecgtest.SinusRR(80, 700, 8), ecg.SynthOptions{RateHz: 500, Seed: 8, Waves: waves})
	a := matchBeats(t, s.RTimes, mustDetect(t, s.Waveform).Times)
	if a.fn+a.fp > 0 {
		t.Errorf("%v", a)
	}
}

func TestDetectEdgeCases(t *testing.T) {
	flat := ecg.Waveform{Samples: make([]float64, 5000), RateHz: 500}
	d, err := ecg.Detect(flat)
	if err != nil || len(d.Beats) != 0 || d.MeanHR != 0 {
		t.Errorf("flat line: got %v, %v", d, err)
	}
	short := mustSynth(t, []float64{800}, ecg.SynthOptions{RateHz: 250})
	if d, err := ecg.Detect(short.Waveform); err != nil || len(d.Beats) > 2 {
		t.Errorf("one interval: got %v, %v", d, err)
	}
	for _, w := range []ecg.Waveform{
		{Samples: make([]float64, 100), RateHz: 50},
		{Samples: make([]float64, 100), RateHz: 4000},
		{RateHz: 500},
		{Samples: []float64{0, math.Inf(1)}, RateHz: 500},
	} {
		if _, err := ecg.Detect(w); !errors.Is(err, ecg.ErrRecording) {
			t.Errorf("rate %g, %d samples: got %v, want ErrRecording", w.RateHz, len(w.Samples), err)
		}
	}
}

func TestDetectRecoversFromLearningArtefact(t *testing.T) {
	// A 10 mV, 40 ms electrode artefact at 1 s, in the learning phase, sets
	// the thresholds far above every QRS; the detector must recover. The
	// artefact itself may count as a beat and mask the beats within 1 s of
	// it; all others must be found.
	const at = 1.0
	s := mustSynth(t, ecgtest.SinusRR(60, 800, 9), ecg.SynthOptions{RateHz: 500, Seed: 9})
	for i := int(at * 500); i < int(at*500)+20; i++ {
		s.Waveform.Samples[i] += 10
	}
	d := mustDetect(t, s.Waveform)
	var truth, got []float64
	for _, v := range s.RTimes {
		if math.Abs(v-at) > 1 {
			truth = append(truth, v)
		}
	}
	for _, v := range d.Times {
		if math.Abs(v-at) > 1 {
			got = append(got, v)
		}
	}
	a := matchBeats(t, truth, got)
	if a.fn+a.fp > 0 || len(d.Times)-len(got) > 2 {
		t.Errorf("away from the artefact: %v; %d detections near it", a, len(d.Times)-len(got))
	}
}
