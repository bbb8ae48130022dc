package screen

import (
	"math"
	"math/rand/v2"
	"testing"

	"cohortdesk/cohort"
)

func TestWindowCount(t *testing.T) {
	tests := []struct {
		name       string
		start, end int64
		minutes    int
		want       int
	}{
		// hand-worked: 7 x 24 x 60 / 5 = 2016 five-minute windows in a week.
		{"week of 5 min", 0, weekMs, 5, 2016},
		// hand-worked: 7 x 24 x 2 = 336 thirty-minute windows.
		{"week of 30 min", 0, weekMs, 30, 336},
		// hand-worked: a 169-hour week (clocks go back) has 169 x 12 = 2028.
		{"169 h week", 0, 169 * hourMs, 5, 2028},
		// hand-worked: 167 h 2 min: 2004 full windows and one short one.
		{"partial last", 0, 167*hourMs + 2*minuteMs, 5, 2005},
		{"empty", 10, 10, 5, 0},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			if got := WindowCount(tc.start, tc.end, tc.minutes); got != tc.want {
				t.Errorf("WindowCount = %d, want %d", got, tc.want)
			}
		})
	}
}

func TestSummariseWindowsBoundaries(t *testing.T) {
	w := emptyWeek()
	l := 5 * minuteMs
	s := testStart
	// window 0: readings at 0 s, 10 s, 25 s -> 60, 64, 61
	// window 1: a reading exactly on the boundary belongs to the later window.
	// window 2: one reading 1 ms before its end.
	// The pairs (25 s, boundary) and (window 1, window 2) cross boundaries
	// and count in neither window.
	w.HR.Append(s, 60)
	w.HR.Append(s+10_000, 64)
	w.HR.Append(s+25_000, 61)
	w.HR.Append(s+l, 90)
	w.HR.Append(s+l+40_000, 80)
	w.HR.Append(s+3*l-1, 120)
	got := SummariseWindows(nil, &w, 5)
	want := map[int]WindowSummary{
		// hand-worked: |64-60| + |61-64| = 7 over 2 differences; gaps 10 s and
		// 15 s; readings from 0 s to 25 s of the window.
		0: {SumAbs: 7, N: 3, MaxGap: 15_000, First: 0, Last: 25_000},
		// hand-worked: |80-90| = 10; gap 40 s; from 0 s to 40 s.
		1: {SumAbs: 10, N: 2, MaxGap: 40_000, First: 0, Last: 40_000},
		// hand-worked: a single reading has no difference and no gap; it
		// sits 1 ms before the window's end.
		2: {SumAbs: 0, N: 1, MaxGap: 0, First: 299_999, Last: 299_999},
	}
	if len(got) != 2016 {
		t.Fatalf("windows = %d, want 2016", len(got))
	}
	for i, g := range got {
		if g != want[i] {
			t.Errorf("window %d = %+v, want %+v", i, g, want[i])
		}
	}
	// hand-worked: MASD of window 0 is 7/2 = 3.5 bpm.
	if m := got[0].MASD(); m != 3.5 {
		t.Errorf("MASD = %v, want 3.5", m)
	}
}

func TestSummariseWindowsReuse(t *testing.T) {
	w := synthWeek(t, synth{seed: 3, rhythm: afLike, cadenceMs: 20_000, wearHours: 30})
	a := SummariseWindows(nil, &w, 5)
	b := make([]WindowSummary, 5000)
	for i := range b {
		b[i] = WindowSummary{SumAbs: 99, N: 99, MaxGap: 99, Steps: 99}
	}
	b = SummariseWindows(b, &w, 5)
	if len(a) != len(b) {
		t.Fatalf("len %d vs %d", len(a), len(b))
	}
	for i := range a {
		if a[i] != b[i] {
			t.Fatalf("window %d: fresh %+v, reused %+v", i, a[i], b[i])
		}
	}
	allocs := testing.AllocsPerRun(10, func() { b = SummariseWindows(b, &w, 5) })
	if allocs != 0 {
		t.Errorf("SummariseWindows with room allocated %v times, want 0", allocs)
	}
}

func TestStepApportioning(t *testing.T) {
	l := 5 * minuteMs
	s := testStart
	tests := []struct {
		name  string
		t0    int64
		t1    int64
		v     int32
		check map[int]float64
	}{
		// hand-worked: 600 steps over one hour give 600 x 5/60 = 50 to each
		// of its twelve 5-minute windows.
		{"hourly total", s, s + hourMs, 600, map[int]float64{0: 50, 11: 50, 12: 0}},
		// hand-worked: an interval inside one window counts in full there.
		{"inside one", s + 10_000, s + 70_000, 37, map[int]float64{0: 37, 1: 0}},
		// hand-worked: 100 steps over [4 min, 6 min): half in window 0, half in 1.
		{"straddle", s + 4*minuteMs, s + 6*minuteMs, 100, map[int]float64{0: 50, 1: 50}},
		// hand-worked: a zero-length interval counts in full where it starts.
		{"instant", s + l, s + l, 80, map[int]float64{0: 0, 1: 80}},
		// hand-worked: [-5 min, +5 min) with 100 steps: only the half inside
		// the week counts, 50 in window 0.
		{"before week", s - l, s + l, 100, map[int]float64{0: 50, 1: 0}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			w := emptyWeek()
			w.Steps.AppendInterval(tc.t0, tc.t1, tc.v)
			got := SummariseWindows(nil, &w, 5)
			for i, want := range tc.check {
				if math.Abs(got[i].Steps-want) > 1e-9 {
					t.Errorf("window %d steps = %v, want %v", i, got[i].Steps, want)
				}
			}
		})
	}
}

// referenceSummaries is a slow, obvious version of SummariseWindows to check
// the fast path against: it groups readings by division and apportions steps
// window by window.
func referenceSummaries(w *cohort.Week, minutes int) []WindowSummary {
	l := int64(minutes) * minuteMs
	nw := WindowCount(w.Start, w.End, minutes)
	out := make([]WindowSummary, nw)
	last := make([]int, nw)
	for i := range last {
		last[i] = -1
	}
	for i, t := range w.HR.T {
		if t < w.Start || t >= w.End {
			continue
		}
		wi := int((t - w.Start) / l)
		if j := last[wi]; j >= 0 {
			d := float64(w.HR.V[i] - w.HR.V[j])
			out[wi].SumAbs += int64(math.Abs(d))
			out[wi].MaxGap = max(out[wi].MaxGap, int32(t-w.HR.T[j]))
		}
		out[wi].N++
		last[wi] = i
	}
	for k := range w.Steps.T {
		t0, t1, c := w.Steps.T[k], w.Steps.End[k], float64(w.Steps.V[k])
		for wi := range out {
			ws := w.Start + int64(wi)*l
			we := min(ws+l, w.End)
			if t1 == t0 {
				if t0 >= ws && t0 < we {
					out[wi].Steps += c
				}
				continue
			}
			if ov := min(t1, we) - max(t0, ws); ov > 0 && c > 0 {
				out[wi].Steps += c * float64(ov) / float64(t1-t0)
			}
		}
	}
	return out
}

func compareSummaries(tb testing.TB, got, want []WindowSummary) {
	tb.Helper()
	if len(got) != len(want) {
		tb.Fatalf("windows = %d, want %d", len(got), len(want))
	}
	for i := range got {
		g, r := got[i], want[i]
		if g.SumAbs != r.SumAbs || g.N != r.N || g.MaxGap != r.MaxGap || math.Abs(g.Steps-r.Steps) > 1e-6*(1+math.Abs(r.Steps)) {
			tb.Fatalf("window %d = %+v, reference %+v", i, g, r)
		}
	}
}

func TestSummariseWindowsMatchesReference(t *testing.T) {
	for _, tc := range []struct {
		s       synth
		minutes int
	}{
		{synth{seed: 1, rhythm: sinus, cadenceMs: 7_000, walks: 4}, 5},
		{synth{seed: 2, rhythm: afLike, cadenceMs: 45_000, walks: 2}, 30},
		{synth{seed: 3, rhythm: afLike, cadenceMs: 400_000}, 7},
	} {
		w := synthWeek(t, tc.s)
		w.End -= 3 * minuteMs // a short last window
		compareSummaries(t, SummariseWindows(nil, &w, tc.minutes), referenceSummaries(&w, tc.minutes))
	}
}

// FuzzSummariseWindows compares the fast path with the reference on arbitrary
// sorted readings and step intervals.
func FuzzSummariseWindows(f *testing.F) {
	f.Add([]byte{1, 60, 0, 61, 200, 62, 3, 90}, uint8(5), uint16(0))
	f.Add([]byte{255, 255, 255, 0, 0, 0}, uint8(1), uint16(1234))
	f.Fuzz(func(t *testing.T, data []byte, minutes uint8, steps uint16) {
		if minutes == 0 {
			minutes = 1
		}
		w := cohort.Week{Start: testStart, End: testStart + 6*hourMs + int64(steps%7)*minuteMs}
		tm := w.Start - 30_000
		for i := 0; i+1 < len(data); i += 2 {
			tm += int64(data[i]) * 997 // strictly increasing, crossing many boundaries
			w.HR.Append(tm, int32(data[i+1]))
		}
		if steps > 0 {
			a := w.Start + int64(steps)*13_000 - hourMs
			w.Steps.AppendInterval(a, a+int64(steps%97)*61_000, int32(steps))
		}
		compareSummaries(t, SummariseWindows(nil, &w, int(minutes)), referenceSummaries(&w, int(minutes)))
	})
}

func TestMedian(t *testing.T) {
	tests := []struct {
		x    []float64
		want float64
	}{
		{[]float64{3, 1, 2}, 2},       // hand-worked
		{[]float64{4, 1, 3, 2}, 2.5},  // hand-worked: (2+3)/2
		{[]float64{5, 5, 5, 1, 9}, 5}, // hand-worked: ties
		{[]float64{7}, 7},             // hand-worked
		{nil, 0},                      // documented: 0 for no windows
		{[]float64{2, 2, 1, 1}, 1.5},  // hand-worked: (1+2)/2
		{[]float64{1, 1, 1, 1, 1}, 1}, // hand-worked
		{[]float64{9, 8, 7, 6, 5}, 7}, // hand-worked
		{[]float64{0, 10, 0, 10}, 5},  // hand-worked
		{[]float64{3, 3, 1, 3, 3}, 3}, // hand-worked
		{[]float64{1, 2, 3, 4, 5, 6}, 3.5},
	}
	for _, tc := range tests {
		if got := median(append([]float64(nil), tc.x...)); got != tc.want {
			t.Errorf("median(%v) = %v, want %v", tc.x, got, tc.want)
		}
	}
	// Against sorting, on random data with many ties.
	rng := rand.New(rand.NewPCG(9, 9))
	for range 200 {
		n := 1 + rng.IntN(300)
		x := make([]float64, n)
		for i := range x {
			x[i] = float64(rng.IntN(20)) / 3
		}
		s := append([]float64(nil), x...)
		sortFloats(s)
		want := s[(n-1)/2]
		if n%2 == 0 {
			want = (s[n/2-1] + s[n/2]) / 2
		}
		if got := median(x); got != want {
			t.Fatalf("median of %d values = %v, want %v", n, got, want)
		}
	}
}

func sortFloats(x []float64) {
	for i := 1; i < len(x); i++ {
		for j := i; j > 0 && x[j] < x[j-1]; j-- {
			x[j], x[j-1] = x[j-1], x[j]
		}
	}
}

// TestShortLastWindow checks wear in a week whose length is not a multiple of
// the window (as across a daylight-saving change).
func TestShortLastWindow(t *testing.T) {
	p := oneRule()
	p.MinWearHours = 0.5
	w := cohort.Week{Week: 3, Start: testStart, End: testStart + hourMs + 2*minuteMs}
	fillWindows(&w, 5, 0, 13, 70, 2, 10_000)
	res := mustScreen(t, &w, p, nil)
	got := res.Windows[0]
	// hand-worked: 12 full windows and one of 2 minutes (12 readings), all
	// usable: 62 minutes = 1.0333 h.
	if got.Windows != 13 || got.Usable != 13 {
		t.Fatalf("windows %d usable %d, want 13 and 13", got.Windows, got.Usable)
	}
	if want := 62.0 / 60; math.Abs(got.UsableHours-want) > 1e-12 {
		t.Errorf("usable hours %v, want %v", got.UsableHours, want)
	}
}
