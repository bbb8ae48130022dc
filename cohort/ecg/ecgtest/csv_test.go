package ecgtest

import (
	"math"
	"testing"

	"cohortdesk/cohort/ecg"
)

func TestEncodeCSVRoundTrip(t *testing.T) {
	w := ecg.Waveform{Samples: []float64{0, 0.0125, -1.2344, 2.5, -0.0004}, RateHz: 360}
	got, err := ecg.ReadCSV(EncodeCSV(w), ecg.CSVOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if got.RateHz != 360 || len(got.Samples) != len(w.Samples) {
		t.Fatalf("got %d samples at %g Hz", len(got.Samples), got.RateHz)
	}
	for i, v := range w.Samples {
		if math.Abs(got.Samples[i]-v) > 0.0005+1e-12 {
			t.Errorf("sample %d: got %g mV, want %g within half a microvolt", i, got.Samples[i], v)
		}
	}
}
