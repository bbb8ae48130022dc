package ecg

import (
	"errors"
	"math"
	"strings"
	"testing"
	"time"
)

func TestCheckRecording(t *testing.T) {
	tests := []struct {
		name      string
		n         int
		fs        float64
		wantShort bool
		wantErr   bool
	}{
		// 30 s single-lead minimum for an AF diagnosis (2020 ESC AF
		// guidelines; verified, secondary).
		{"exactly 30 s", 7500, 250, false, false},
		{"one sample short of 30 s", 7499, 250, true, false},
		{"10 s", 5000, 500, true, false},
		// Our rate bounds, 100-2000 Hz.
		{"100 Hz", 3000, 100, false, false},
		{"2000 Hz", 60000, 2000, false, false},
		{"99 Hz", 3000, 99, false, true},
		{"2001 Hz", 60000, 2001, false, true},
		{"NaN rate", 3000, math.NaN(), false, true},
		{"no samples", 0, 250, false, true},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			c, err := CheckRecording(Waveform{Samples: make([]float64, tt.n), RateHz: tt.fs})
			if (err != nil) != tt.wantErr {
				t.Fatalf("got error %v, want error %v", err, tt.wantErr)
			}
			if err != nil {
				if !errors.Is(err, ErrRecording) {
					t.Errorf("%v does not match ErrRecording", err)
				}
				return
			}
			if c.TooShortForDiagnosis != tt.wantShort || c.Samples != tt.n || math.Abs(c.Seconds-float64(tt.n)/tt.fs) > 1e-12 {
				t.Errorf("got %+v", c)
			}
		})
	}
	if _, err := CheckRecording(Waveform{Samples: []float64{0, math.NaN()}, RateHz: 250}); !errors.Is(err, ErrRecording) {
		t.Errorf("NaN sample: got %v", err)
	}
}

func TestWaveformDuration(t *testing.T) {
	w := Waveform{Samples: make([]float64, 7500), RateHz: 250}
	if got := w.Duration(); got != 30*time.Second {
		t.Errorf("got %v, want 30s", got)
	}
	if got := (Waveform{Samples: make([]float64, 10)}).Seconds(); got != 0 {
		t.Errorf("no rate: got %g s", got)
	}
}

func TestInputErrorMessage(t *testing.T) {
	tests := []struct {
		err  *InputError
		want string
	}{
		{&InputError{Format: "edf", Field: "digital minimum", Offset: 376, Signal: 1, Err: errors.New("x")}, "ecg: edf: signal 1 digital minimum (byte 376): x"},
		{&InputError{Format: "edf", Offset: 528, Record: 3, Err: errors.New("y")}, "ecg: edf: data record 3 (byte 528): y"},
		{&InputError{Format: "edf", Offset: 12, Err: errors.New("z")}, "ecg: edf: byte 12: z"},
		{&InputError{Format: "csv", Line: 7, Field: "sample", Err: errors.New("w")}, "ecg: csv: line 7 sample: w"},
	}
	for _, tt := range tests {
		if got := tt.err.Error(); got != tt.want {
			t.Errorf("got %q, want %q", got, tt.want)
		}
		if !strings.HasPrefix(tt.err.Error(), "ecg: ") || !errors.Is(tt.err, ErrFormat) {
			t.Errorf("%v: want the package prefix and ErrFormat", tt.err)
		}
	}
}

// The 30 s rule at its edge: AF is diagnosed on at least 30 s of ECG (2020
// ESC AF guidelines), so 30 s is enough and anything less is not.
func TestTooShortAtThirtySeconds(t *testing.T) {
	for _, tt := range []struct {
		s    float64
		want bool
	}{{0, true}, {29.996, true}, {30, false}, {30.004, false}, {300, false}} {
		if got := TooShort(tt.s); got != tt.want {
			t.Errorf("TooShort(%g) = %v, want %v", tt.s, got, tt.want)
		}
	}
}
