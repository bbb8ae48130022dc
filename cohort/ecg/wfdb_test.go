package ecg_test

import (
	"errors"
	"math"
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort/ecg"
	"cohortdesk/cohort/ecg/ecgtest"
)

// Format 212 packs two 12-bit samples into three bytes (WFDB
// specification, signal files): the first sample is the low 12 bits of the
// first two bytes read as a little-endian word; the second has its high 4
// bits in the high nibble of the middle byte and its low 8 bits in the
// third byte. By hand: 291 = 0x123 and -2 = 0xFFE (12-bit two's complement)
// give 0x23, 0xF1 (0xF from the second sample, 0x1 from the first), 0xFE;
// -2048 = 0x800 and 2047 = 0x7FF give 0x00, 0x78, 0xFF; a lone last sample
// 5 takes 0x05, 0x00.
func TestFormat212Packing(t *testing.T) {
	samples := []int{291, -2, -2048, 2047, 5}
	want := []byte{0x23, 0xF1, 0xFE, 0x00, 0x78, 0xFF, 0x05, 0x00}
	if got := ecgtest.Pack212(samples); !slices.Equal(got, want) {
		t.Fatalf("test writer packs % X, want % X (hand-worked from the specification)", got, want)
	}
	hdr := "r212 1 360 5\nr212.dat 212 200 12 0 291 0 0 ECG\n"
	rec, err := ecg.ReadWFDB(ecg.File{Name: "r212.hea", Data: []byte(hdr)}, []ecg.File{{Name: "r212.dat", Data: want}}, nil)
	if err != nil {
		t.Fatal(err)
	}
	got := rec.Contents.Leads[0].Waveform.Samples
	// 200 ADC units per mV; -2048 is the format's invalid value: NaN.
	for i, d := range []float64{291, -2, math.NaN(), 2047, 5} {
		if w := d / 200; !(math.Abs(got[i]-w) < 1e-12 || math.IsNaN(w) && math.IsNaN(got[i])) {
			t.Errorf("sample %d = %v mV, want %v", i, got[i], w)
		}
	}
}

// The MIT annotation format (WFDB specification, annotation files): each
// annotation a 16-bit little-endian word, code in the upper 6 bits and the
// time since the previous annotation in the lower 10; SKIP (59) carries a
// longer interval in the two words after it, high word first; AUX (63)
// gives the length of a text that follows, padded to an even length; a zero
// word ends the file. By hand: a normal beat (1) at sample 100 is
// 1<<10 | 100 = 0x0464, bytes 64 04; a premature ventricular beat (5) 1000
// samples later is 5<<10 | 0x3E8 = 0x17E8, bytes E8 17; 5000 samples on
// needs SKIP: 00 EC, then 5000 = 0x00001388 as 00 00 88 13, then a normal
// beat with 0: 00 04; a rhythm annotation (28) 10 samples on, 0x700A, bytes
// 0A 70, with the text "(N" (AUX, length 2: 02 FC, then 28 4E); end 00 00.
func TestAnnotationEncoding(t *testing.T) {
	raw := []byte{0x64, 0x04, 0xE8, 0x17, 0x00, 0xEC, 0x00, 0x00, 0x88, 0x13, 0x00, 0x04, 0x0A, 0x70, 0x02, 0xFC, 0x28, 0x4E, 0x00, 0x00}
	written := ecgtest.EncodeAnnotations([]ecgtest.BeatAnnotation{{Sample: 100, Code: 1}, {Sample: 1100, Code: 5}, {Sample: 6100, Code: 1}, {Sample: 6110, Code: 28, Aux: "(N"}})
	if !slices.Equal(written, raw) {
		t.Fatalf("test writer writes % X, want % X (hand-worked from the specification)", written, raw)
	}
	anns, err := ecg.ReadAnnotations("r.atr", raw)
	if err != nil {
		t.Fatal(err)
	}
	want := []ecg.Annotation{{Sample: 100, Code: 1}, {Sample: 1100, Code: 5}, {Sample: 6100, Code: 1}, {Sample: 6110, Code: 28, Aux: "(N"}}
	if !slices.Equal(anns, want) {
		t.Fatalf("read %+v, want %+v", anns, want)
	}
	if beats := ecg.BeatSamples(anns); !slices.Equal(beats, []int64{100, 1100, 6100}) {
		t.Errorf("beats %v: a rhythm annotation is not a beat", beats)
	}
	for _, bad := range [][]byte{{0x64}, {0x00, 0xEC, 0x00}, {0x64, 0x04, 0x05, 0xFC, 'a'}} {
		if _, err := ecg.ReadAnnotations("bad.atr", bad); !errors.Is(err, ecg.ErrFormat) {
			t.Errorf("% X: got %v, want a format error", bad, err)
		}
	}
}

// A record of three signals written from the specification's definitions
// (a respiration signal, lead V5 and lead II as "MLII"), in formats 16 and
// 212: the leads are read back to the ADC step, the respiration signal is
// listed and not read, lead II is analysed first among the two leads, the
// start comes from the header, and invalid samples come back as NaN.
func TestReadWFDBRecord(t *testing.T) {
	syn := mustSynth(t, ecgtest.SinusRR(20, 800, 2), ecg.SynthOptions{RateHz: 360})
	n := len(syn.Waveform.Samples)
	resp := make([]float64, n)
	inv := make([]bool, n)
	inv[10], inv[11] = true, true
	for i := range resp {
		resp[i] = math.Sin(float64(i) / 360)
	}
	for _, format := range []int{16, 212} {
		files, err := ecgtest.EncodeWFDB("rec", 360, format, []ecgtest.WFDBChannel{
			{Description: "Resp", Units: "l", Values: resp},
			{Description: "V5", Values: syn.Waveform.Samples, Baseline: 1024, ADCRes: 11},
			{Description: "MLII", Values: syn.Waveform.Samples, Invalid: inv},
		})
		if err != nil {
			t.Fatal(err)
		}
		hdr := strings.Replace(string(files.Header), "rec 3 360 "+itoa(n), "rec 3 360 "+itoa(n)+" 09:30:05 02/06/2026", 1)
		rec, err := ecg.ReadWFDB(ecg.File{Name: "rec.hea", Data: []byte(hdr)}, []ecg.File{{Name: "rec.dat", Data: files.Signal}}, time.UTC)
		if err != nil {
			t.Fatalf("format %d: %v", format, err)
		}
		c := rec.Contents
		if len(c.Signals) != 3 || c.Signals[0].Kind != ecg.KindOther || c.Signals[1].Kind != ecg.KindECG || c.Signals[2].Kind != ecg.KindECG {
			t.Fatalf("format %d: signals %+v", format, c.Signals)
		}
		if len(c.Leads) != 2 || c.Leads[c.Chosen].Waveform.Label != "MLII" {
			t.Fatalf("format %d: leads %d, chosen %q", format, len(c.Leads), c.Leads[c.Chosen].Waveform.Label)
		}
		if want := time.Date(2026, 6, 2, 9, 30, 5, 0, time.UTC); !c.Start.Equal(want) {
			t.Errorf("format %d: start %v, want %v", format, c.Start, want)
		}
		for li, lead := range c.Leads {
			for i, v := range lead.Waveform.Samples {
				w := syn.Waveform.Samples[i]
				if li == 1 && inv[i] {
					if !math.IsNaN(v) {
						t.Fatalf("format %d: invalid sample %d read as %v", format, i, v)
					}
					continue
				}
				if math.Abs(v-w) > 0.5/200+1e-12 && math.Abs(w) < 10 {
					t.Fatalf("format %d lead %d sample %d: %v mV, want %v within half a step", format, li, i, v, w)
				}
			}
		}
		if len(c.Warnings) != 0 {
			t.Errorf("format %d: warnings %q", format, c.Warnings)
		}
		// A damaged sample no longer matches the header's checksum.
		// Flip the lowest bit of lead II's sample in the middle frame.
		bad := slices.Clone(files.Signal)
		k := n / 2
		if format == 16 {
			bad[6*k+4] ^= 0x01 // frame k is 6 bytes; lead II is its third sample
		} else {
			j := 3*k + 2 // lead II's place in the sample stream
			if j%2 == 0 {
				bad[3*(j/2)] ^= 0x01
			} else {
				bad[3*(j/2)+2] ^= 0x01
			}
		}
		rec, err = ecg.ReadWFDB(ecg.File{Name: "rec.hea", Data: files.Header}, []ecg.File{{Name: "rec.dat", Data: bad}}, nil)
		if err != nil || !strings.Contains(strings.Join(rec.Contents.Warnings, " "), "checksum") {
			t.Errorf("format %d: damaged file: warnings %q, err %v", format, rec.Contents.Warnings, err)
		}
	}
}

func itoa(n int) string { return strconv.Itoa(n) }

func TestReadWFDBRefusals(t *testing.T) {
	sig := []ecg.File{{Name: "r.dat", Data: make([]byte, 40)}}
	tests := []struct {
		name, header string
		files        []ecg.File
		want         string
		is           error
	}{
		{"no record line", "# only a comment\n", sig, "record line", nil},
		{"multi-segment", "r/2 1 360\n", sig, "multi-segment", ecg.ErrUnsupported},
		{"missing signal line", "r 2 360 10\nr.dat 16 200 16 0 0 0 0 ECG\n", sig, "announces 2 signals", ecg.ErrTruncated},
		{"bad rate", "r 1 fast\nr.dat 16\n", sig, "sampling frequency", nil},
		{"signal file missing", "r 1 360 10\nother.dat 16 200 16 0 0 0 0 ECG\n", sig, `"other.dat"`, nil},
		{"unsupported format", "r 1 360 10\nr.dat 8 200 8 0 0 0 0 ECG\n", sig, "format 8", ecg.ErrUnsupported},
		{"file too short", "r 1 360 100\nr.dat 16 200 16 0 0 0 0 ECG\n", sig, "holds 20", ecg.ErrTruncated},
		{"no ECG", "r 2 360 10\nr.dat 16 100/g 16 0 0 0 0 Accel X\nr.dat 16 1 16 0 0 0 0 Marker\n", sig, "no ECG signal", nil},
		{"several samples per frame", "r 1 360 10\nr.dat 16x2 200 16 0 0 0 0 ECG\n", sig, "several samples per frame", ecg.ErrUnsupported},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			_, err := ecg.ReadWFDB(ecg.File{Name: "r.hea", Data: []byte(tt.header)}, tt.files, nil)
			if err == nil || !strings.Contains(err.Error(), tt.want) || !errors.Is(err, ecg.ErrFormat) {
				t.Fatalf("got %v, want a format error containing %q", err, tt.want)
			}
			if tt.is != nil && !errors.Is(err, tt.is) {
				t.Errorf("%v does not match %v", err, tt.is)
			}
		})
	}
}

// MatchBeats pairs beats one to one within the window, closest first
// (hand-worked): reference 1.00, 2.00, 3.00 s; detected 1.10 (matches 1.00),
// 1.95 and 2.12 (both near 2.00: 1.95 is closer, 2.12 is a false positive),
// and 4.00 (no reference within 150 ms): TP 2, FN 1 (3.00), FP 2.
func TestMatchBeats(t *testing.T) {
	m := ecg.MatchBeats([]float64{1, 2, 3}, []float64{4, 2.12, 1.95, 1.10}, 0.150)
	if m != (ecg.Match{TP: 2, FN: 1, FP: 2}) {
		t.Fatalf("got %+v", m)
	}
	if math.Abs(m.Se()-200.0/3) > 1e-12 || m.PPV() != 50 {
		t.Errorf("Se %v +P %v, want 66.7 and 50", m.Se(), m.PPV())
	}
	// A beat exactly at the window's edge matches.
	if m := ecg.MatchBeats([]float64{1}, []float64{1.15}, 0.150); m.TP != 1 {
		t.Errorf("edge: %+v", m)
	}
	if g := m.Add(ecg.Match{TP: 1, FN: 2, FP: 3}); g != (ecg.Match{TP: 3, FN: 3, FP: 5}) {
		t.Errorf("gross %+v", g)
	}
	if !math.IsNaN((ecg.Match{}).Se()) {
		t.Error("Se without reference beats should be undefined")
	}
}
