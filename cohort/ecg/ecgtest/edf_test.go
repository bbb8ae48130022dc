package ecgtest

import (
	"fmt"
	"math"
	"testing"
	"time"

	"cohortdesk/cohort/ecg"
)

// mvPerUnit is the size of one unit of an EDF physical dimension in mV,
// written here so the round trip does not lean on the reader's own table.
func mvPerUnit(dim string) (float64, error) {
	switch dim {
	case "uV":
		return 0.001, nil
	case "mV":
		return 1, nil
	case "V":
		return 1000, nil
	}
	return 0, fmt.Errorf("dimension %q", dim)
}

func TestEDFRoundTrip(t *testing.T) {
	s, err := ecg.Synthesize(SinusRR(12, 800, 3), ecg.SynthOptions{RateHz: 250, WanderMV: 0.2, WanderHz: 0.2, Seed: 1})
	if err != nil {
		t.Fatal(err)
	}
	w := s.Waveform
	w.Label = "ECG lead I"
	w.Start = time.Date(2025, 6, 7, 8, 9, 10, 500e6, time.UTC)
	tests := []struct {
		name      string
		opt       EDFWriteOptions
		wantStart time.Time
	}{
		{"EDF uV", EDFWriteOptions{}, w.Start.Truncate(time.Second)},
		{"EDF+C mV 2 s records", EDFWriteOptions{Plus: true, Dimension: "mV", RecordSeconds: 2}, w.Start},
		{"EDF V fixed range", EDFWriteOptions{Dimension: "V", PhysMin: -0.005, PhysMax: 0.005}, w.Start.Truncate(time.Second)},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			b, err := EncodeEDF(w, tt.opt)
			if err != nil {
				t.Fatal(err)
			}
			f, err := ecg.ReadEDF(b, ecg.EDFOptions{})
			if err != nil {
				t.Fatal(err)
			}
			sig := f.Header.Signals[f.Header.Chosen]
			unitMV, _ := mvPerUnit(sig.Dimension)
			halfStep := (sig.PhysMax - sig.PhysMin) / 65535 / 2 * unitMV
			got := f.Waveform
			if got.RateHz != w.RateHz || got.Label != w.Label || !got.Start.Equal(tt.wantStart) {
				t.Errorf("got rate %g label %q start %v", got.RateHz, got.Label, got.Start)
			}
			spr := int(w.RateHz * f.Header.RecordSeconds)
			if wantN := (len(w.Samples) + spr - 1) / spr * spr; len(got.Samples) != wantN {
				t.Errorf("got %d samples, want %d", len(got.Samples), wantN)
			}
			worst := 0.0
			for i, v := range w.Samples {
				worst = math.Max(worst, math.Abs(got.Samples[i]-v))
			}
			if worst > halfStep*(1+1e-9) {
				t.Errorf("worst error %g mV, more than half a step %g mV", worst, halfStep)
			}
			if tt.opt.Plus != (f.Header.Variant == "EDF+C") {
				t.Errorf("variant %q", f.Header.Variant)
			}
			if f.Identity.Patient != "X X X X" {
				t.Errorf("patient field %q, want the EDF+ unknown form", f.Identity.Patient)
			}
		})
	}
}

func TestEncodeEDFUnknownStart(t *testing.T) {
	w := ecg.Waveform{Samples: []float64{0, 1, 0, -1}, RateHz: 4}
	for _, plus := range []bool{false, true} {
		b, err := EncodeEDF(w, EDFWriteOptions{Plus: plus})
		if err != nil {
			t.Fatal(err)
		}
		if got := string(b[168:184]); got != "01.01.8500.00.00" {
			t.Errorf("plus=%v: date and time %q", plus, got)
		}
		f, err := ecg.ReadEDF(b, ecg.EDFOptions{})
		if err != nil {
			t.Fatal(err)
		}
		// EDF+ says "Startdate X", which reads back as unknown; plain EDF
		// cannot say so and reads back as its placeholder date.
		if got := f.Waveform.Start.IsZero(); got != plus {
			t.Errorf("plus=%v: start %v", plus, f.Waveform.Start)
		}
	}
}

func TestEncodeEDFRefuses(t *testing.T) {
	tests := []struct {
		name string
		w    ecg.Waveform
		o    EDFWriteOptions
	}{
		{"no samples", ecg.Waveform{RateHz: 250}, EDFWriteOptions{}},
		{"no rate", ecg.Waveform{Samples: []float64{1}}, EDFWriteOptions{}},
		{"fractional samples per record", ecg.Waveform{Samples: []float64{1}, RateHz: 250.5}, EDFWriteOptions{}},
		{"bad dimension", ecg.Waveform{Samples: []float64{1}, RateHz: 250}, EDFWriteOptions{Dimension: "mmHg"}},
		{"NaN sample", ecg.Waveform{Samples: []float64{math.NaN()}, RateHz: 250}, EDFWriteOptions{}},
		{"start before 1985", ecg.Waveform{Samples: []float64{1}, RateHz: 250, Start: time.Date(1980, 1, 1, 0, 0, 0, 0, time.UTC)}, EDFWriteOptions{}},
	}
	for _, tt := range tests {
		if _, err := EncodeEDF(tt.w, tt.o); err == nil {
			t.Errorf("%s: got no error", tt.name)
		}
	}
}

func TestFit8(t *testing.T) {
	tests := []struct {
		x    float64
		dir  int
		want string
	}{
		{-1234.5678, -1, "-1234.57"},
		{1234.5678, +1, "1234.568"},
		{0.1, 0, "0.1"},
		{-0.0000001, 0, "0"},
		{12345678, 0, "12345678"},
		{-1234567.8, -1, "-1234568"},
	}
	for _, tt := range tests {
		got, err := fit8(tt.x, tt.dir)
		if err != nil || got != tt.want {
			t.Errorf("fit8(%g, %d) = %q, %v; want %q", tt.x, tt.dir, got, err, tt.want)
		}
	}
	if _, err := fit8(-123456789, 0); err == nil {
		t.Error("fit8 of a 10-character number: got no error")
	}
}
