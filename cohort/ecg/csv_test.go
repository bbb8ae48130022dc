package ecg

import (
	"errors"
	"math"
	"strings"
	"testing"
	"time"
)

func TestReadCSV(t *testing.T) {
	tests := []struct {
		name      string
		in        string
		opt       CSVOptions
		wantRate  float64
		wantMV    []float64
		wantLabel string
		wantStart time.Time
	}{
		{
			name:     "metadata and one column",
			in:       "# sampling_rate_hz=300\n0.1\n-0.2\n0.3\n",
			wantRate: 300, wantMV: []float64{0.1, -0.2, 0.3}, wantLabel: "ECG",
		},
		{
			name:     "microvolts by metadata, CRLF, BOM, comments and blanks",
			in:       "\xef\xbb\xbf# an ECG strip\r\n# unit=uV\r\n# sampling_rate_hz = 250\r\n\r\n100\r\n# a comment between rows\r\n-250\r\n",
			wantRate: 250, wantMV: []float64{0.1, -0.25}, wantLabel: "ECG",
		},
		{
			name:     "time column gives the rate",
			in:       "# label=lead I\ntime_s,uV\n# start=2025-03-01T09:30:00Z\n0.5,1000\n0.504,2000\n0.508,-500\n",
			wantRate: 250, wantMV: []float64{1, 2, -0.5}, wantLabel: "lead I",
			wantStart: time.Date(2025, 3, 1, 9, 30, 0, 500e6, time.UTC),
		},
		{
			name:     "rate from the caller, quoted fields",
			in:       "\"mV\"\n\"0.5\"\n 0.25 \n",
			opt:      CSVOptions{RateHz: 500, Label: "II"},
			wantRate: 500, wantMV: []float64{0.5, 0.25}, wantLabel: "II",
		},
		{
			name:     "caller unit",
			in:       "# sampling_rate_hz=200\n1500\n",
			opt:      CSVOptions{Unit: "uV"},
			wantRate: 200, wantMV: []float64{1.5}, wantLabel: "ECG",
		},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			w, err := ReadCSV([]byte(tt.in), tt.opt)
			if err != nil {
				t.Fatal(err)
			}
			if math.Abs(w.RateHz-tt.wantRate) > 1e-9 || w.Label != tt.wantLabel || !w.Start.Equal(tt.wantStart) {
				t.Errorf("got rate %g label %q start %v", w.RateHz, w.Label, w.Start)
			}
			if len(w.Samples) != len(tt.wantMV) {
				t.Fatalf("got %v, want %v", w.Samples, tt.wantMV)
			}
			for i := range tt.wantMV {
				if math.Abs(w.Samples[i]-tt.wantMV[i]) > 1e-12 {
					t.Errorf("sample %d: got %g, want %g", i, w.Samples[i], tt.wantMV[i])
				}
			}
		})
	}
}

func TestReadCSVErrors(t *testing.T) {
	tests := []struct {
		name     string
		in       string
		opt      CSVOptions
		wantLine int
		wantText string
	}{
		{"no rate", "0.1\n0.2\n", CSVOptions{}, 1, "sampling rate missing"},
		{"not a number", "# sampling_rate_hz=250\n0.1\n0.2\nabc\n", CSVOptions{}, 4, `"abc"`},
		{"NaN", "# sampling_rate_hz=250\n0.1\nNaN\n", CSVOptions{}, 3, "NaN"},
		{"misspelt key", "# sample_rate=250\n0.1\n", CSVOptions{}, 1, "unknown key"},
		{"bad rate", "# sampling_rate_hz=-5\n0.1\n", CSVOptions{}, 1, "sampling_rate_hz"},
		{"bad unit", "# unit=V\n# sampling_rate_hz=250\n0.1\n", CSVOptions{}, 1, "want mV or uV"},
		{"units disagree", "# unit=mV\n# sampling_rate_hz=250\nuV\n1\n", CSVOptions{}, 3, "contradicts"},
		{"rates disagree", "# sampling_rate_hz=250\n1\n", CSVOptions{RateHz: 500}, 1, "contradicts"},
		{"ragged rows", "# sampling_rate_hz=250\n1\n2\n3,4\n", CSVOptions{}, 4, "2 fields, want 1"},
		{"three columns", "# sampling_rate_hz=250\n1,2,3\n", CSVOptions{}, 2, "3 fields"},
		{"bad header", "# sampling_rate_hz=250\nvolts\n1\n", CSVOptions{}, 2, "header"},
		{"time goes back", "time_s,mV\n0,1\n0.01,2\n0.005,3\n", CSVOptions{}, 4, "does not follow"},
		{"uneven times", "time_s,mV\n0,1\n0.004,2\n0.012,3\n0.016,4\n", CSVOptions{RateHz: 250}, 4, "grid"},
		{"no samples", "# sampling_rate_hz=250\n\n", CSVOptions{}, 2, "no samples"},
		{"rate out of bounds", "# sampling_rate_hz=1000000\n1\n", CSVOptions{}, 1, "outside"},
		{"bad start", "# start=yesterday\n", CSVOptions{}, 1, "RFC 3339"},
		{"metadata among the data", "# sampling_rate_hz=250\n1\n# unit=uV\n2\n", CSVOptions{}, 3, "before the first data row"},
		{"invalid UTF-8", "# sampling_rate_hz=250\n1\n\xff\n", CSVOptions{}, 3, "UTF-8"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			_, err := ReadCSV([]byte(tt.in), tt.opt)
			var ie *InputError
			if !errors.As(err, &ie) {
				t.Fatalf("got %v, want an *InputError", err)
			}
			if ie.Line != tt.wantLine || !strings.Contains(err.Error(), tt.wantText) {
				t.Errorf("got line %d %q, want line %d containing %q", ie.Line, err, tt.wantLine, tt.wantText)
			}
			if !strings.Contains(err.Error(), "line ") || !errors.Is(err, ErrFormat) {
				t.Errorf("%q: want a line number and ErrFormat", err)
			}
		})
	}
	if _, err := ReadCSV([]byte("1\n"), CSVOptions{RateHz: 250, Unit: "V"}); err == nil {
		t.Error("unit option V: got no error")
	}
}
