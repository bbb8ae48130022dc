package ecg_test

import (
	"cohortdesk/cohort/ecg"
	"cohortdesk/cohort/ecg/ecgtest"
	"fmt"
	"strings"
	"testing"

	"cohortdesk/cohort/rr"
)

func TestHint(t *testing.T) {
	p := rr.DefaultParams()
	tests := []struct {
		name         string
		rr           []float64
		wantSegments int
		wantAF       bool
		wantText     []string
	}{
		{"sinus, two full segments", ecgtest.SinusRR(300, 800, 1), 2, false, []string{"RR not AF-like", "0 of 2 segments of 128 beats"}},
		{"AF-like, two full segments", ecgtest.AFRR(300, 750, 1), 2, true, []string{"RR irregularly irregular, AF-like", "2 of 2 segments of 128 beats"}},
		// Seed 6: about 1 in 20 independent series falls outside the
		// turning-point band by design of the test (1.96 SD); seed 2 does.
		{"AF-like 30 s strip", ecgtest.AFRR(40, 750, 6), 1, true, []string{"RR irregularly irregular, AF-like", "1 of 1 segment of 40 beats"}},
		{"too short", ecgtest.AFRR(12, 750, 3), 0, false, []string{"too few beats (12 RR intervals)"}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			s := ecg.Hint(tt.rr, p)
			if s.Segments != tt.wantSegments || (s.AFLike > 0) != tt.wantAF {
				t.Errorf("got %+v, want %d segments, AF-like %v", s, tt.wantSegments, tt.wantAF)
			}
			text := ecg.HintText(tt.rr, p)
			// Never a verdict: every text says whom it is for.
			if !strings.HasPrefix(text, "Hint for the over-reader, not a verdict: ") {
				t.Errorf("text %q does not say it is a hint", text)
			}
			for _, want := range tt.wantText {
				if !strings.Contains(text, want) {
					t.Errorf("text %q lacks %q", text, want)
				}
			}
		})
	}
}

func TestHintAgreesWithRR(t *testing.T) {
	// For a series of whole segments, Hint is rr's own summary, and the
	// text shows its figures.
	series := ecgtest.AFRR(256, 700, 4)
	p := rr.DefaultParams()
	want := rr.Summarise(rr.Analyse(series, p))
	if got := ecg.Hint(series, p); got != want {
		t.Errorf("got %+v, want %+v", got, want)
	}
	text := ecg.HintText(series, p)
	for _, v := range []float64{want.MeanNRMSSD, want.MeanEntropy, want.MeanTPR} {
		if f := fmt.Sprintf("%.2f", v); !strings.Contains(text, f) {
			t.Errorf("text %q lacks %s", text, f)
		}
	}
}

func TestHintInvalidParams(t *testing.T) {
	p := rr.DefaultParams()
	p.Bins = 0
	if s := ecg.Hint(ecgtest.AFRR(300, 700, 5), p); s.Segments != 0 {
		t.Errorf("invalid params: got %+v", s)
	}
	if text := ecg.HintText(ecgtest.AFRR(300, 700, 5), p); !strings.Contains(text, "invalid") || !strings.HasPrefix(text, "Hint for the over-reader") {
		t.Errorf("invalid params: text %q", text)
	}
}

func TestHintFromDetectedBeats(t *testing.T) {
	// End to end: synthetic ECG, detected beats, hint. The sinus recording
	// must read regular; the AF-like one irregular in at least one segment.
	p := rr.DefaultParams()
	sinus := mustSynth(t, ecgtest.SinusRR(260, 800, 21), ecg.SynthOptions{RateHz: 250, WanderMV: 0.2, WanderHz: 0.2, Noise: true, SNRdB: 12, Seed: 21})
	af := mustSynth(t, ecgtest.AFRR(260, 700, 22), ecg.SynthOptions{RateHz: 250, WanderMV: 0.2, WanderHz: 0.2, Noise: true, SNRdB: 12, Seed: 22})
	if s := ecg.Hint(mustDetect(t, sinus.Waveform).RRms, p); s.Segments != 2 || s.AFLike != 0 {
		t.Errorf("sinus: %+v", s)
	}
	if s := ecg.Hint(mustDetect(t, af.Waveform).RRms, p); s.Segments != 2 || s.AFLike == 0 {
		t.Errorf("AF-like: %+v", s)
	}
}
