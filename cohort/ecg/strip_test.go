package ecg_test

import (
	"cohortdesk/cohort/ecg"
	"cohortdesk/cohort/ecg/ecgtest"
	"math"
	"strings"
	"testing"
)

// constant returns n samples of value v at rate fs.
func constant(n int, fs, v float64) ecg.Waveform {
	w := ecg.Waveform{Samples: make([]float64, n), RateHz: fs}
	for i := range w.Samples {
		w.Samples[i] = v
	}
	return w
}

func TestLayoutScales(t *testing.T) {
	// 10 mm/mV and 25 mm/s (common practice; Kligfield 2007, from memory):
	// a 1 mV step 1 s into the row rises 10 mm at x = margin + 25 mm.
	const fs = 500
	w := constant(5000, fs, 0)
	for i := 500; i < len(w.Samples); i++ {
		w.Samples[i] = 1
	}
	l := ecg.Layout(w, nil, ecg.StripOptions{})
	if len(l.Rows) != 1 {
		t.Fatalf("got %d rows, want 1", len(l.Rows))
	}
	row := l.Rows[0]
	var before, after ecg.Point
	for _, p := range row.Trace {
		if p.X < 10+25-0.01 {
			before = p
		} else if after == (ecg.Point{}) {
			after = p
		}
	}
	if got := before.Y - after.Y; math.Abs(got-10) > 1e-9 {
		t.Errorf("1 mV step: rise %g mm, want 10", got)
	}
	if got := after.X - 10; math.Abs(got-25) > 1e-9 {
		t.Errorf("step at 1 s: x %g mm after the margin, want 25", got)
	}
	if l.WidthMM != 10+250 || l.MinorMM != 1 || l.MajorMM != 5 {
		t.Errorf("paper: width %g, squares %g/%g", l.WidthMM, l.MinorMM, l.MajorMM)
	}
}

func TestLayoutRows(t *testing.T) {
	tests := []struct {
		seconds float64
		fs      float64
		rows    int
	}{
		{30, 250, 3},
		{30, 500, 3},
		{30.01, 500, 4},
		{9.5, 300, 1},
		{0, 500, 0},
	}
	for _, tt := range tests {
		n := int(math.Round(tt.seconds * tt.fs))
		l := ecg.Layout(constant(n, tt.fs, 0.3), nil, ecg.StripOptions{})
		if len(l.Rows) != tt.rows {
			t.Errorf("%g s at %g Hz: %d rows, want %d", tt.seconds, tt.fs, len(l.Rows), tt.rows)
			continue
		}
		if want := float64(tt.rows) * 30; l.HeightMM != want {
			t.Errorf("%g s: height %g mm, want %g", tt.seconds, l.HeightMM, want)
		}
		for r, row := range l.Rows {
			if row.StartSeconds != float64(r)*10 || row.TopMM != float64(r)*30 || row.BaselineMM != row.TopMM+15 {
				t.Errorf("row %d: start %g s, top %g, baseline %g", r, row.StartSeconds, row.TopMM, row.BaselineMM)
			}
			// A constant signal sits on the row's centre line, offset or not.
			for _, p := range row.Trace {
				if p.Y != row.BaselineMM {
					t.Fatalf("row %d: point %v off the baseline", r, p)
				}
			}
		}
	}
}

func TestLayoutCalibrationPulse(t *testing.T) {
	l := ecg.Layout(constant(2500, 250, 0), nil, ecg.StripOptions{})
	c := l.Rows[0].Calibration
	base := l.Rows[0].BaselineMM
	// 1 mV for 200 ms: 10 mm tall and 5 mm wide.
	want := []ecg.Point{{0, base}, {2.5, base}, {2.5, base - 10}, {7.5, base - 10}, {7.5, base}, {10, base}}
	if len(c) != len(want) {
		t.Fatalf("got %v, want %v", c, want)
	}
	for i := range want {
		if math.Abs(c[i].X-want[i].X) > 1e-9 || math.Abs(c[i].Y-want[i].Y) > 1e-9 {
			t.Errorf("point %d: got %v, want %v", i, c[i], want[i])
		}
	}
}

func TestLayoutDecimationKeepsPeaks(t *testing.T) {
	// At 1000 Hz a 0.2 mm step holds 8 samples; a one-sample spike must
	// survive, and the trace must hold at most two points per step.
	const fs = 1000
	w := constant(10000, fs, 0)
	w.Samples[4321] = 1.2
	w.Samples[7000] = -0.7
	l := ecg.Layout(w, []int{4321, 12345}, ecg.StripOptions{})
	row := l.Rows[0]
	if max := 2 * int(math.Ceil(250/0.2)); len(row.Trace) > max {
		t.Errorf("%d points, want at most %d", len(row.Trace), max)
	}
	var top, bottom ecg.Point
	for _, p := range row.Trace {
		if p.Y < top.Y || top == (ecg.Point{}) {
			top = p
		}
		if p.Y > bottom.Y {
			bottom = p
		}
	}
	if math.Abs(top.Y-(15-12)) > 1e-9 || math.Abs(top.X-(10+4.321*25)) > 1e-9 {
		t.Errorf("spike drawn at %v, want (%g, 3)", top, 10+4.321*25)
	}
	if math.Abs(bottom.Y-(15+7)) > 1e-9 {
		t.Errorf("trough drawn at %v, want y 22", bottom)
	}
	for i := 1; i < len(row.Trace); i++ {
		if row.Trace[i].X <= row.Trace[i-1].X {
			t.Fatalf("points %d and %d out of time order", i-1, i)
		}
	}
	if len(row.Beats) != 1 || math.Abs(row.Beats[0]-(10+4.321*25)) > 1e-9 {
		t.Errorf("beats %v, want one at %g", row.Beats, 10+4.321*25)
	}
}

func TestLayoutClipping(t *testing.T) {
	w := constant(2500, 250, 0)
	w.Samples[100] = 5 // 50 mm above the baseline of a 30 mm row
	w.Samples[200] = -3
	row := ecg.Layout(w, nil, ecg.StripOptions{}).Rows[0]
	if row.Clipped != 2 {
		t.Errorf("clipped %d points, want 2", row.Clipped)
	}
	for _, p := range row.Trace {
		if p.Y < row.TopMM || p.Y > row.TopMM+30 {
			t.Errorf("point %v outside the row", p)
		}
	}
}

func TestLayoutOptions(t *testing.T) {
	// 50 mm/s and 20 mm/mV double both scales; short rows of 5 s.
	w := constant(5000, 500, 0)
	w.Samples[250] = 1
	l := ecg.Layout(w, nil, ecg.StripOptions{SpeedMMPerS: 50, GainMMPerMV: 20, RowSeconds: 5, RowHeightMM: 50})
	if len(l.Rows) != 2 || l.WidthMM != 10+250 {
		t.Fatalf("rows %d width %g", len(l.Rows), l.WidthMM)
	}
	var spike ecg.Point
	for _, p := range l.Rows[0].Trace {
		if p.Y < 25 {
			spike = p
		}
	}
	if math.Abs(spike.X-(10+25)) > 1e-9 || math.Abs(spike.Y-(25-20)) > 1e-9 {
		t.Errorf("spike at %v, want (35, 5)", spike)
	}
	if got := ecg.Layout(ecg.Waveform{Samples: []float64{1}}, nil, ecg.StripOptions{}); len(got.Rows) != 0 {
		t.Errorf("no rate: %d rows", len(got.Rows))
	}
}

func TestPathD(t *testing.T) {
	tests := []struct {
		in   []ecg.Point
		want string
	}{
		{nil, ""},
		{[]ecg.Point{{1, 2}}, "M1.00,2.00"},
		{[]ecg.Point{{0, 15}, {0.2, 14.456}, {0.4, -0.001}, {10.005, 3}}, "M0.00,15.00L0.20,14.46 0.40,0.00 10.01,3.00"},
	}
	for _, tt := range tests {
		if got := ecg.PathD(tt.in); got != tt.want {
			t.Errorf("PathD(%v) = %q, want %q", tt.in, got, tt.want)
		}
	}
	// A whole 10 s row stays compact: about 14 bytes per point.
	s := mustSynth(t, ecgtest.SinusRR(12, 800, 1), ecg.SynthOptions{RateHz: 500})
	row := ecg.Layout(s.Waveform, nil, ecg.StripOptions{}).Rows[0]
	d := ecg.PathD(row.Trace)
	if strings.Count(d, ",") != len(row.Trace) || len(d) > 15*len(row.Trace) {
		t.Errorf("%d points gave %d bytes", len(row.Trace), len(d))
	}
}

// Mark puts each premature beat and each unusable stretch on the row that
// holds it, at paper position: 25 mm/s from the row's start after the 10 mm
// margin (standard paper speed, common practice). At 250 Hz a row holds 10 s
// (2,500 samples): beat sample 2,600 is 0.4 s into row 2, 10 mm after the
// margin; a stretch over samples 2,400 to 2,700 is shaded at the end of row
// 1 and the start of row 2. A premature index outside the beats is ignored.
func TestMarkPlacesPrematureBeatsAndStretches(t *testing.T) {
	const fs = 250
	w := constant(3*2500, fs, 0)
	beats := []int{100, 2600, 5100, 7400}
	l := ecg.Layout(w, beats, ecg.StripOptions{})
	if len(l.Rows) != 3 {
		t.Fatalf("%d rows, want 3", len(l.Rows))
	}
	q := &ecg.Quality{Stretches: []ecg.Stretch{{Start: 2400, End: 2700, Kind: ecg.Flat}}}
	l = ecg.Mark(l, fs, q, beats, []int{1, 3, 9})
	near := func(a, b float64) bool { return math.Abs(a-b) < 1e-9 }
	if p := l.Rows[0].Premature; len(p) != 0 {
		t.Errorf("row 1 marks %v, want no premature beat", p)
	}
	if p := l.Rows[1].Premature; len(p) != 1 || !near(p[0], 10+10) {
		t.Errorf("row 2 marks %v, want one premature beat at 20 mm", p)
	}
	if p := l.Rows[2].Premature; len(p) != 1 || !near(p[0], 10+(7400-5000)/250.0*25) {
		t.Errorf("row 3 marks %v, want one premature beat at 250 mm", p)
	}
	s0, s1 := l.Rows[0].Shaded, l.Rows[1].Shaded
	if len(s0) != 1 || !near(s0[0].X0, 10+240) || !near(s0[0].X1, 10+250) || s0[0].Kind != ecg.Flat {
		t.Errorf("row 1 shades %+v, want 250-260 mm, flat line", s0)
	}
	if len(s1) != 1 || !near(s1[0].X0, 10) || !near(s1[0].X1, 10+20) {
		t.Errorf("row 2 shades %+v, want 10-30 mm", s1)
	}
	if len(l.Rows[2].Shaded) != 0 {
		t.Errorf("row 3 shades %+v, want none", l.Rows[2].Shaded)
	}
}
