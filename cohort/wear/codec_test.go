package wear

import (
	"errors"
	"math"
	"math/rand/v2"
	"reflect"
	"testing"

	"cohortdesk/cohort"
)

// sameSamples compares series, treating nil and empty columns alike.
func sameSamples(a, b cohort.Samples) bool {
	eq64 := func(x, y []int64) bool { return len(x) == len(y) && (len(x) == 0 || reflect.DeepEqual(x, y)) }
	eq32 := func(x, y []int32) bool { return len(x) == len(y) && (len(x) == 0 || reflect.DeepEqual(x, y)) }
	return eq64(a.T, b.T) && eq32(a.V, b.V) && eq64(a.End, b.End)
}

func mustRoundTrip(tb testing.TB, s cohort.Samples, kind cohort.Kind) []byte {
	tb.Helper()
	b := Encode(s, kind)
	got, err := Decode(b)
	if err != nil {
		tb.Fatalf("Decode(Encode(%v)): %v", s, err)
	}
	want := s
	if kind != cohort.Steps {
		want.End = nil
	}
	if !sameSamples(got, want) {
		tb.Fatalf("round trip of %s:\n got %+v\nwant %+v", kind, got, want)
	}
	k, _, n, _, err := header(b)
	if err != nil || k != kind || n != s.Len() {
		tb.Fatalf("header = %v, %d, %v; want %v, %d", k, n, err, kind, s.Len())
	}
	return b
}

func TestCodecRoundTrip(t *testing.T) {
	t0 := genStart
	tests := []struct {
		name  string
		s     cohort.Samples
		kind  cohort.Kind
		flags byte // expected time-column flags
	}{
		{"empty", cohort.Samples{}, cohort.HeartRate, flagSeconds},
		{"one", cohort.Samples{T: []int64{t0 + 7}, V: []int32{60}}, cohort.HeartRate, flagSeconds},
		{"whole seconds", cohort.Samples{T: []int64{t0, t0 + 5000, t0 + 305000}, V: []int32{60, 62, 58}}, cohort.HeartRate, flagSeconds},
		{"milliseconds", cohort.Samples{T: []int64{t0, t0 + 812, t0 + 1650}, V: []int32{812, 838, 790}}, cohort.RRInterval, flagDoD}, // steps 812, 838: 812 then +26 is shorter
		{"regular", cohort.Samples{T: []int64{t0, t0 + 300000, t0 + 600000, t0 + 900000, t0 + 1200000}, V: []int32{60, 60, 61, 61, 60}}, cohort.HeartRate, flagSeconds | flagDoD},
		{"steps", cohort.Samples{T: []int64{t0, t0 + 60000, t0 + 180000}, V: []int32{10, 0, 120}, End: []int64{t0 + 60000, t0 + 120000, t0 + 240000}}, cohort.Steps, flagSeconds | flagDoD | flagEnd}, // 60 s, 120 s: 60 then +60 fits one byte each
		{"steps odd end", cohort.Samples{T: []int64{t0, t0 + 60000}, V: []int32{10, 0}, End: []int64{t0 + 60500, t0 + 120000}}, cohort.Steps, flagEnd},
		{"unsorted and extremes", cohort.Samples{T: []int64{math.MaxInt64, math.MinInt64, 0, -1}, V: []int32{math.MaxInt32, math.MinInt32, 0, -1}}, cohort.HeartRate, 0},
		{"End ignored for heart rate", cohort.Samples{T: []int64{t0}, V: []int32{60}, End: []int64{t0 + 1}}, cohort.HeartRate, flagSeconds},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			b := mustRoundTrip(t, tt.s, tt.kind)
			if got := b[2]; got != tt.flags {
				t.Errorf("flags %#x, want %#x", got, tt.flags)
			}
		})
	}
}

// TestCodecRandom is a property test: any series round-trips exactly.
func TestCodecRandom(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	for i := 0; i < 2000; i++ {
		n := rng.IntN(200)
		kind := cohort.Kind(1 + rng.IntN(3))
		var s cohort.Samples
		tt := rng.Int64()
		scale := []int64{1, 1000, 60000}[rng.IntN(3)]
		for j := 0; j < n; j++ {
			switch rng.IntN(10) {
			case 0:
				tt = rng.Int64() // wild jump, maybe backwards
			default:
				tt += rng.Int64N(1000) * scale
			}
			v := int32(rng.Uint32())
			if rng.IntN(2) == 0 {
				v = int32(40 + rng.IntN(100))
			}
			if kind == cohort.Steps {
				s.AppendInterval(tt, tt+rng.Int64N(10)*scale, v)
			} else {
				s.Append(tt, v)
			}
		}
		mustRoundTrip(t, s, kind)
	}
}

// TestCodecBytesPerReading checks the storage target on a realistic week of
// heart rate: at most 4 bytes a reading before any compression by the
// database.
func TestCodecBytesPerReading(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 6))
	for _, jitter := range []bool{false, true} {
		s := realisticHR(rng, 7, jitter)
		b := mustRoundTrip(t, s, cohort.HeartRate)
		per := float64(len(b)) / float64(s.Len())
		t.Logf("ms timestamps %v: %d readings, %d bytes, %.2f bytes/reading", jitter, s.Len(), len(b), per)
		if per > 4 {
			t.Errorf("%.2f bytes per reading, want at most 4", per)
		}
	}
}

func TestDecodeCorrupt(t *testing.T) {
	good := Encode(cohort.Samples{T: []int64{genStart, genStart + 1000}, V: []int32{60, 61}}, cohort.HeartRate)
	steps := Encode(cohort.Samples{T: []int64{genStart}, V: []int32{5}, End: []int64{genStart + 60000}}, cohort.Steps)
	with := func(b []byte, i int, c byte) []byte {
		out := append([]byte(nil), b...)
		out[i] = c
		return out
	}
	tests := []struct {
		name string
		in   []byte
	}{
		{"nil", nil},
		{"header only", good[:3]},
		{"version", with(good, 0, 9)},
		{"kind", with(good, 1, 0)},
		{"unknown flag", with(good, 2, 0x40)},
		{"end flag on heart rate", with(good, 2, flagEnd|flagSeconds)},
		{"steps without end flag", with(steps, 2, flagSeconds)},
		{"count too large", with(good, 3, 100)},
		{"truncated", good[:len(good)-1]},
		{"trailing byte", append(append([]byte(nil), good...), 0)},
		{"count overflow", []byte{1, 1, 0, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0x01}},
		{"value beyond 32 bits", []byte{1, 1, 1, 1, 0, 0xfe, 0xff, 0xff, 0xff, 0x1f}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			s, err := Decode(tt.in)
			if !errors.Is(err, ErrCorrupt) {
				t.Fatalf("Decode = %+v, %v; want ErrCorrupt", s, err)
			}
			if s.Len() != 0 {
				t.Errorf("readings returned with an error: %+v", s)
			}
		})
	}
}

func TestDecodeIntoReuses(t *testing.T) {
	a := Encode(cohort.Samples{T: []int64{1000, 2000, 3000}, V: []int32{1, 2, 3}}, cohort.HeartRate)
	b := Encode(cohort.Samples{T: []int64{5000}, V: []int32{9}, End: []int64{6000}}, cohort.Steps)
	var s cohort.Samples
	if err := DecodeInto(&s, a); err != nil {
		t.Fatal(err)
	}
	p := &s.T[0]
	if err := DecodeInto(&s, b); err != nil {
		t.Fatal(err)
	}
	want := cohort.Samples{T: []int64{5000}, V: []int32{9}, End: []int64{6000}}
	if !sameSamples(s, want) || &s.T[0] != p {
		t.Errorf("got %+v (reused %v), want %+v", s, &s.T[0] == p, want)
	}
}

func TestEncodePanicsOnRaggedColumns(t *testing.T) {
	defer func() {
		if recover() == nil {
			t.Error("no panic for 2 times and 1 value")
		}
	}()
	Encode(cohort.Samples{T: []int64{1, 2}, V: []int32{1}}, cohort.HeartRate)
}

// FuzzDecode feeds arbitrary bytes to Decode: it must never panic, and what
// it accepts must encode and decode back to the same series.
func FuzzDecode(f *testing.F) {
	// Seeds stay short: the fuzzer minimises every new interesting input,
	// and minimising a long one takes minutes.
	rng := rand.New(rand.NewPCG(9, 9))
	hr, st := realisticHR(rng, 1, true), stepsSeries(rng, 1)
	f.Add(Encode(cohort.Samples{T: hr.T[:40], V: hr.V[:40]}, cohort.HeartRate))
	f.Add(Encode(cohort.Samples{T: st.T[:20], V: st.V[:20], End: st.End[:20]}, cohort.Steps))
	f.Add(Encode(cohort.Samples{T: []int64{1, 2}, V: []int32{800, 790}}, cohort.RRInterval))
	f.Add([]byte{1, 1, 0, 0})
	f.Fuzz(func(t *testing.T, b []byte) {
		s, err := Decode(b)
		if err != nil {
			if !errors.Is(err, ErrCorrupt) {
				t.Fatalf("error %v does not wrap ErrCorrupt", err)
			}
			return
		}
		kind, _, n, _, err := header(b)
		if err != nil || n != s.Len() {
			t.Fatalf("header %v %d %v, decoded %d", kind, n, err, s.Len())
		}
		again, err := Decode(Encode(s, kind))
		if err != nil || !sameSamples(again, s) {
			t.Fatalf("re-encoding changed the series: %v", err)
		}
	})
}
