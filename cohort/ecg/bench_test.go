package ecg_test

import (
	"cohortdesk/cohort/ecg"
	"cohortdesk/cohort/ecg/ecgtest"
	"cohortdesk/cohort/rr"
	"testing"
	"time"
)

// benchSignal makes a noisy sinus recording of the given length at 500 Hz.
func benchSignal(b *testing.B, seconds float64) ecg.Waveform {
	b.Helper()
	n := int(seconds / 0.8)
	s, err := ecg.Synthesize(ecgtest.SinusRR(n, 800, 1), ecg.SynthOptions{RateHz: 500, WanderMV: 0.2, WanderHz: 0.2, Noise: true, SNRdB: 12, Seed: 1})
	if err != nil {
		b.Fatal(err)
	}
	return s.Waveform
}

func benchDetect(b *testing.B, seconds float64) {
	w := benchSignal(b, seconds)
	b.ResetTimer()
	for b.Loop() {
		if _, err := ecg.Detect(w); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(len(w.Samples))*float64(b.N)/b.Elapsed().Seconds(), "samples/s")
}

// BenchmarkDetect30s runs the detector over a 30 s strip at 500 Hz.
func BenchmarkDetect30s(b *testing.B) { benchDetect(b, 30) }

// BenchmarkDetect5min runs the detector over a 5 min recording at 500 Hz.
func BenchmarkDetect5min(b *testing.B) { benchDetect(b, 300) }

// BenchmarkSynthesize30s generates a 30 s strip at 500 Hz.
func BenchmarkSynthesize30s(b *testing.B) {
	rr := ecgtest.SinusRR(37, 800, 1)
	for b.Loop() {
		if _, err := ecg.Synthesize(rr, ecg.SynthOptions{RateHz: 500}); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkBaselineLowPass5min runs the published low-pass filter alone over
// the samples of the 5 min recording: the baseline against which
// BenchmarkDetect5min is read as a ratio in the same run.
func BenchmarkBaselineLowPass5min(b *testing.B) {
	w := benchSignal(b, 300)
	b.ResetTimer()
	for b.Loop() {
		_ = ecg.LowPass(w.Samples)
	}
	b.ReportMetric(float64(len(w.Samples))*float64(b.N)/b.Elapsed().Seconds(), "samples/s")
}

// BenchmarkAnalyseVersusDetect5min runs the whole analysis of intake
// (stored resolution, quality check, detection per usable stretch,
// premature beats, hint) and, in the same iteration, the detector alone
// over the same 5 min recording at 500 Hz, and reports the ratio of their
// times: what the steps around the detector cost.
func BenchmarkAnalyseVersusDetect5min(b *testing.B) {
	w := benchSignal(b, 300)
	p := rr.DefaultParams()
	var analyse, detect time.Duration
	b.ResetTimer()
	for b.Loop() {
		t0 := time.Now()
		if _, err := ecg.Analyse(w, ecg.Limits{}, p); err != nil {
			b.Fatal(err)
		}
		t1 := time.Now()
		if _, err := ecg.Detect(w); err != nil {
			b.Fatal(err)
		}
		analyse += t1.Sub(t0)
		detect += time.Since(t1)
	}
	b.ReportMetric(analyse.Seconds()/float64(b.N)*1000, "analyse-ms/op")
	b.ReportMetric(detect.Seconds()/float64(b.N)*1000, "detect-ms/op")
	b.ReportMetric(analyse.Seconds()/detect.Seconds(), "analyse/detect")
}
