package screen

import (
	"bytes"
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"math/rand/v2"
	"reflect"
	"slices"
	"testing"

	"cohortdesk/cohort"
)

func TestCleanHeartRate(t *testing.T) {
	p := DefaultProtocol() // 25-250 bpm, common practice
	s := testStart
	tests := []struct {
		name  string
		t     []int64
		v     []int32
		wantT []int64
		wantV []int32
		want  KindCounts
	}{
		{
			name:  "all good",
			t:     []int64{s, s + 1000, s + 2000},
			v:     []int32{60, 61, 62},
			wantT: []int64{s, s + 1000, s + 2000}, wantV: []int32{60, 61, 62},
			want: KindCounts{In: 3, Kept: 3},
		},
		{
			// hand-worked: 24 and 251 are outside 25-250; the bounds themselves are kept.
			name:  "range bounds",
			t:     []int64{s, s + 1, s + 2, s + 3},
			v:     []int32{24, 25, 250, 251},
			wantT: []int64{s + 1, s + 2}, wantV: []int32{25, 250},
			want: KindCounts{In: 4, Kept: 2, OutOfRange: 2},
		},
		{
			// hand-worked: two exact copies of (s+5, 70) collapse to one.
			name:  "exact duplicates",
			t:     []int64{s, s + 5, s + 5, s + 5},
			v:     []int32{60, 70, 70, 70},
			wantT: []int64{s, s + 5}, wantV: []int32{60, 70},
			want: KindCounts{In: 4, Kept: 2, Duplicate: 2},
		},
		{
			// hand-worked: 70 and 90 at one time conflict, the copy of 70 is a
			// duplicate; both distinct values go.
			name:  "conflicting",
			t:     []int64{s, s + 5, s + 5, s + 5, s + 9},
			v:     []int32{60, 70, 90, 70, 61},
			wantT: []int64{s, s + 9}, wantV: []int32{60, 61},
			want: KindCounts{In: 5, Kept: 2, Duplicate: 1, Conflicting: 2},
		},
		{
			// hand-worked: one reading after now, one before the week, one at
			// End (the week is half-open).
			name:  "future and outside",
			t:     []int64{s - 1, s, s + weekMs, testNow + 1},
			v:     []int32{60, 61, 62, 63},
			wantT: []int64{s}, wantV: []int32{61},
			want: KindCounts{In: 4, Kept: 1, Future: 1, OutsideWeek: 2},
		},
		{
			// hand-worked: two descents (300 after 900, 100 after 300) are reordered.
			name:  "unsorted",
			t:     []int64{s + 900, s + 300, s + 100, s + 500},
			v:     []int32{64, 62, 61, 63},
			wantT: []int64{s + 100, s + 300, s + 500, s + 900}, wantV: []int32{61, 62, 63, 64},
			want: KindCounts{In: 4, Kept: 4, Reordered: 2},
		},
		{
			// hand-worked: the first reason in order wins: future before
			// range; the pair arrived out of order once.
			name:  "one reason each",
			t:     []int64{testNow + 5, s + 1},
			v:     []int32{300, 60},
			wantT: []int64{s + 1}, wantV: []int32{60},
			want: KindCounts{In: 2, Kept: 1, Future: 1, Reordered: 1},
		},
		{
			// hand-worked: V has one value more than T; it has no time.
			name:  "malformed",
			t:     []int64{s},
			v:     []int32{60, 61},
			wantT: []int64{s}, wantV: []int32{60},
			want: KindCounts{In: 2, Kept: 1, Malformed: 1},
		},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			w := emptyWeek()
			w.HR = cohort.Samples{T: slices.Clone(tc.t), V: slices.Clone(tc.v)}
			got, c := Clean(&w, p, testNow)
			if c.HR != tc.want {
				t.Errorf("counts = %+v, want %+v", c.HR, tc.want)
			}
			if c.HR.In != c.HR.Kept+c.HR.Dropped() {
				t.Errorf("In %d != Kept %d + Dropped %d", c.HR.In, c.HR.Kept, c.HR.Dropped())
			}
			if !slices.Equal(got.HR.T, tc.wantT) || !slices.Equal(got.HR.V, tc.wantV) {
				t.Errorf("cleaned = %v %v, want %v %v", got.HR.T, got.HR.V, tc.wantT, tc.wantV)
			}
			if !slices.Equal(w.HR.T, tc.t) || !slices.Equal(w.HR.V, tc.v) {
				t.Errorf("input modified")
			}
		})
	}
}

func TestCleanRRAndSteps(t *testing.T) {
	p := DefaultProtocol()
	s := testStart
	w := emptyWeek()
	// hand-worked: RR bounds from 25-250 bpm are 60000/250 = 240 ms and
	// 60000/25 = 2400 ms; 239 and 2401 fall outside, 0 is never plausible.
	w.RR = cohort.Samples{T: []int64{s + 1, s + 2, s + 3, s + 4, s + 5}, V: []int32{239, 240, 2400, 2401, 0}}
	// hand-worked: a negative count and an interval ending before it starts
	// are out of range; an interval starting before the week but reaching
	// into it is kept; one wholly before the week is outside it.
	w.Steps = cohort.Samples{
		T:   []int64{s - hourMs, s - 2*hourMs, s, s + hourMs, s + 2*hourMs},
		End: []int64{s + 10*minuteMs, s - hourMs, s + hourMs, s + hourMs - 1, s + 3*hourMs},
		V:   []int32{100, 50, -3, 10, 20},
	}
	got, c := Clean(&w, p, testNow)
	wantRR := KindCounts{In: 5, Kept: 2, OutOfRange: 3}
	if c.RR != wantRR {
		t.Errorf("RR counts = %+v, want %+v", c.RR, wantRR)
	}
	if !slices.Equal(got.RR.V, []int32{240, 2400}) {
		t.Errorf("RR kept = %v, want [240 2400]", got.RR.V)
	}
	// hand-worked: the second interval starts before the first: one reordering.
	wantSteps := KindCounts{In: 5, Kept: 2, Reordered: 1, OutsideWeek: 1, OutOfRange: 2}
	if c.Steps != wantSteps {
		t.Errorf("steps counts = %+v, want %+v", c.Steps, wantSteps)
	}
	if !slices.Equal(got.Steps.V, []int32{100, 20}) || !slices.Equal(got.Steps.End, []int64{s + 10*minuteMs, s + 3*hourMs}) {
		t.Errorf("steps kept = %v %v, want [100 20] with ends", got.Steps.V, got.Steps.End)
	}
}

// TestCleanOrderIndependent checks that the cleaned week, and so the digest,
// does not depend on the order readings arrived in.
func TestCleanOrderIndependent(t *testing.T) {
	w := synthWeek(t, synth{seed: 11, rhythm: sinus, cadenceMs: 30_000, wearHours: 12})
	// add trouble: duplicates and a conflict
	w.HR.Append(w.HR.T[10], w.HR.V[10])
	w.HR.Append(w.HR.T[20], w.HR.V[20]+7)
	a, ca := Clean(&w, DefaultProtocol(), testNow)

	rng := rand.New(rand.NewPCG(1, 1))
	sh := w
	sh.HR = cohort.Samples{T: slices.Clone(w.HR.T), V: slices.Clone(w.HR.V)}
	rng.Shuffle(sh.HR.Len(), func(i, j int) {
		sh.HR.T[i], sh.HR.T[j] = sh.HR.T[j], sh.HR.T[i]
		sh.HR.V[i], sh.HR.V[j] = sh.HR.V[j], sh.HR.V[i]
	})
	b, cb := Clean(&sh, DefaultProtocol(), testNow)
	if !reflect.DeepEqual(a.HR, b.HR) {
		t.Errorf("cleaned series differ after shuffling")
	}
	if cb.HR.Reordered == 0 {
		t.Errorf("shuffled input reported no reordering")
	}
	ca.HR.Reordered, cb.HR.Reordered = 0, 0
	if ca.HR != cb.HR {
		t.Errorf("counts differ after shuffling: %+v vs %+v", ca.HR, cb.HR)
	}
	// hand-worked: one exact copy, and reading 20 with a second value.
	if ca.HR.Duplicate != 1 || ca.HR.Conflicting != 2 {
		t.Errorf("duplicate %d conflicting %d, want 1 and 2", ca.HR.Duplicate, ca.HR.Conflicting)
	}
	if InputDigest(&a) != InputDigest(&b) {
		t.Errorf("digest differs after shuffling")
	}
}

// TestInputDigest checks the digest against an independent encoding of the
// documented format written with encoding/binary.Write.
func TestInputDigest(t *testing.T) {
	w := emptyWeek()
	w.HR.Append(testStart+1000, 72)
	w.HR.Append(testStart+2000, 75)
	w.Steps.AppendInterval(testStart, testStart+hourMs, 120)
	w.RR.Append(testStart+3000, 810)

	var buf bytes.Buffer
	must := func(v any) {
		if err := binary.Write(&buf, binary.BigEndian, v); err != nil {
			t.Fatal(err)
		}
	}
	buf.WriteString("cohortdesk screen input v1\n")
	must(int64(w.Week))
	must(w.Start)
	must(w.End)
	must(uint8(1))
	must(uint64(2))
	must(testStart + 1000)
	must(int32(72))
	must(testStart + 2000)
	must(int32(75))
	must(uint8(2))
	must(uint64(1))
	must(testStart)
	must(int32(120))
	must(testStart + hourMs)
	must(uint8(3))
	must(uint64(1))
	must(testStart + 3000)
	must(int32(810))
	sum := sha256.Sum256(buf.Bytes())
	want := hex.EncodeToString(sum[:])
	if got := InputDigest(&w); got != want {
		t.Errorf("InputDigest = %s, want %s", got, want)
	}
	w.HR.V[1] = 76
	if got := InputDigest(&w); got == want {
		t.Errorf("InputDigest unchanged after a value changed")
	}
}

// TestInputDigestLong crosses the internal 4096-byte buffer many times.
func TestInputDigestLong(t *testing.T) {
	w := synthWeek(t, synth{seed: 5, rhythm: afLike, cadenceMs: 60_000})
	var buf bytes.Buffer
	buf.WriteString(digestMagic)
	_ = binary.Write(&buf, binary.BigEndian, []int64{int64(w.Week), w.Start, w.End})
	buf.WriteByte(1)
	_ = binary.Write(&buf, binary.BigEndian, uint64(w.HR.Len()))
	for i := range w.HR.T {
		_ = binary.Write(&buf, binary.BigEndian, w.HR.T[i])
		_ = binary.Write(&buf, binary.BigEndian, w.HR.V[i])
	}
	buf.WriteByte(2)
	_ = binary.Write(&buf, binary.BigEndian, uint64(w.Steps.Len()))
	for i := range w.Steps.T {
		_ = binary.Write(&buf, binary.BigEndian, w.Steps.T[i])
		_ = binary.Write(&buf, binary.BigEndian, w.Steps.V[i])
		_ = binary.Write(&buf, binary.BigEndian, w.Steps.End[i])
	}
	buf.WriteByte(3)
	_ = binary.Write(&buf, binary.BigEndian, uint64(0))
	sum := sha256.Sum256(buf.Bytes())
	if got, want := InputDigest(&w), hex.EncodeToString(sum[:]); got != want {
		t.Errorf("InputDigest = %s, want %s", got, want)
	}
}

// FuzzClean checks Clean's accounting and ordering on arbitrary readings.
func FuzzClean(f *testing.F) {
	f.Add([]byte{0, 60, 1, 61, 1, 61, 0, 200, 5, 2})
	f.Add([]byte{9, 9, 9, 9, 0, 0, 255, 255})
	f.Fuzz(func(t *testing.T, data []byte) {
		w := emptyWeek()
		for i := 0; i+1 < len(data); i += 2 {
			// times cluster so duplicates and conflicts occur; some fall
			// before the week or after now
			tm := testStart + (int64(data[i])-8)*weekMs/64
			w.HR.Append(tm, int32(data[i+1]))
		}
		got, c := Clean(&w, DefaultProtocol(), testStart+weekMs/2)
		if c.HR.In != len(w.HR.T) || c.HR.In != c.HR.Kept+c.HR.Dropped() {
			t.Fatalf("counts do not add up: %+v for %d readings", c.HR, len(w.HR.T))
		}
		if got.HR.Len() != c.HR.Kept {
			t.Fatalf("kept %d, counted %d", got.HR.Len(), c.HR.Kept)
		}
		for i := 1; i < got.HR.Len(); i++ {
			if got.HR.T[i] <= got.HR.T[i-1] {
				t.Fatalf("cleaned times not strictly increasing at %d", i)
			}
		}
	})
}
