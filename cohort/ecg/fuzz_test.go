package ecg_test

import (
	"cohortdesk/cohort/ecg"
	"cohortdesk/cohort/ecg/ecgtest"
	"errors"
	"math"
	"testing"
)

// edfSeeds are well-formed and slightly broken EDF files for the fuzzer to
// start from: our writer's output in both variants, the hand-made files of the
// tests, and cuts through them.
func edfSeeds(tb testing.TB) [][]byte {
	tb.Helper()
	w := ecg.Waveform{Samples: []float64{0, 0.5, 1, -0.25, 0.125, 0, 0.1, 0.2}, RateHz: 4, Label: "ECG"}
	var seeds [][]byte
	for _, o := range []ecgtest.EDFWriteOptions{{}, {Plus: true}, {Plus: true, Dimension: "mV", RecordSeconds: 2}} {
		b, err := ecgtest.EncodeEDF(w, o)
		if err != nil {
			tb.Fatal(err)
		}
		seeds = append(seeds, b)
	}
	plain := plainSpec(tb).bytes(tb)
	seeds = append(seeds, plain, plain[:300], plain[:len(plain)-3])
	spec := plainSpec(tb)
	spec.records = "-1"
	seeds = append(seeds, spec.bytes(tb))
	return seeds
}

func FuzzReadEDF(f *testing.F) {
	for _, s := range edfSeeds(f) {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		got, err := ecg.ReadEDF(data, ecg.EDFOptions{})
		if err != nil {
			var ie *ecg.InputError
			if !errors.As(err, &ie) {
				t.Fatalf("error %v is not an *InputError", err)
			}
			return
		}
		h := got.Header
		sig := h.Signals[h.Chosen]
		if sig.Annotation || len(got.Waveform.Samples) != h.Records*sig.SamplesPerRecord {
			t.Fatalf("chose %+v, %d samples for %d records", sig, len(got.Waveform.Samples), h.Records)
		}
		if r := got.Waveform.RateHz; !(r >= ecg.MinFileRateHz && r <= ecg.MaxFileRateHz) {
			t.Fatalf("rate %g", r)
		}
		for _, v := range got.Waveform.Samples {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				t.Fatalf("sample %v", v)
			}
		}
	})
}

func FuzzReadCSV(f *testing.F) {
	for _, s := range []string{
		"# sampling_rate_hz=300\n0.1\n-0.2\n0.3\n",
		"\xef\xbb\xbf# unit=uV\r\n# sampling_rate_hz=250\r\n100\r\n-250\r\n",
		"# label=lead I\n# start=2025-03-01T09:30:00Z\ntime_s,uV\n0.5,1000\n0.504,2000\n0.508,-500\n",
		"\"mV\"\n\"0.5\"\n 0.25 \n",
		"time_s,mV\n0,1\n0.01,2\n0.005,3\n",
		"# sampling_rate_hz=250\n1\n2\n3,4\n",
		"1e-3\n-inf\n",
		"",
	} {
		f.Add([]byte(s), 0.0)
		f.Add([]byte(s), 500.0)
	}
	f.Fuzz(func(t *testing.T, data []byte, rate float64) {
		w, err := ecg.ReadCSV(data, ecg.CSVOptions{RateHz: rate})
		if err != nil {
			return
		}
		if !(w.RateHz >= ecg.MinFileRateHz && w.RateHz <= ecg.MaxFileRateHz) || len(w.Samples) == 0 {
			t.Fatalf("rate %g, %d samples", w.RateHz, len(w.Samples))
		}
		for _, v := range w.Samples {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				t.Fatalf("sample %v", v)
			}
		}
	})
}

func FuzzDetect(f *testing.F) {
	s, err := ecg.Synthesize(ecgtest.AFRR(8, 700, 1), ecg.SynthOptions{RateHz: 250})
	if err != nil {
		f.Fatal(err)
	}
	seed := make([]byte, len(s.Waveform.Samples))
	for i, v := range s.Waveform.Samples {
		seed[i] = byte(int8(math.Max(-127, math.Min(127, 100*v))))
	}
	f.Add(seed, uint16(250))
	f.Add([]byte{0, 127, 128, 255, 0}, uint16(100))
	f.Fuzz(func(t *testing.T, data []byte, rate uint16) {
		w := ecg.Waveform{Samples: make([]float64, len(data)), RateHz: float64(rate)}
		for i, b := range data {
			w.Samples[i] = float64(int8(b)) / 100
		}
		d, err := ecg.Detect(w)
		if err != nil {
			return
		}
		for i := range d.Beats {
			if d.Beats[i] < 0 || d.Beats[i] >= len(data) || (i > 0 && d.Beats[i] <= d.Beats[i-1]) {
				t.Fatalf("beats %v out of order or range", d.Beats)
			}
		}
		if len(d.RRms) != max(0, len(d.Beats)-1) {
			t.Fatalf("%d beats, %d intervals", len(d.Beats), len(d.RRms))
		}
	})
}
