package screen

import (
	"errors"
	"math"
	"slices"
	"strings"
	"testing"

	"cohortdesk/cohort"
	"cohortdesk/cohort/overread"
	"cohortdesk/cohort/stats"
)

func TestCheckSweep(t *testing.T) {
	p := DefaultProtocol()
	for _, c := range []struct {
		param  string
		values []float64
		field  string // "" when the sweep can run
	}{
		{"windows[0].masd_threshold", []float64{3, 8, 30}, ""},
		{"min_wear_hours", []float64{12}, ""},
		{"windows[0].masd_threshold", []float64{-1}, "values"}, // makes the protocol invalid
		{"windows[7].masd_threshold", []float64{5}, "param"},   // no such window
		{"windows[0].minutes", []float64{5}, "param"},          // not sweepable
		{"windows[0].run_length", []float64{2.5}, "param"},     // a whole number is needed
		{"min_wear_hours", nil, "values"},
		{"min_wear_hours", make([]float64, MaxSweepValues+1), "values"},
		{"min_wear_hours", []float64{math.NaN()}, "values"},
		{"min_wear_hours", []float64{math.Inf(1)}, "values"},
	} {
		err := CheckSweep(p, c.param, c.values)
		var ve *cohort.ValidationError
		switch {
		case c.field == "" && err != nil:
			t.Errorf("%s %v: %v", c.param, c.values, err)
		case c.field != "" && (!errors.As(err, &ve) || ve.Fields[c.field] == ""):
			t.Errorf("%s %v: err %v, want a refusal of the field %q", c.param, c.values, err, c.field)
		}
	}
}

func TestSweepValues(t *testing.T) {
	for _, c := range []struct {
		from, to float64
		steps    int
		integer  bool
		want     []float64
	}{
		{4, 40, 3, false, []float64{4, 22, 40}},
		{8, 8, 1, false, []float64{8}},
		{40, 4, 3, false, []float64{40, 22, 4}},
		// 0.1 + 0.2 x 1/2 is 0.30000000000000004 in binary floating point;
		// six significant digits make it 0.3 (hand-worked).
		{0.1, 0.5, 3, false, []float64{0.1, 0.3, 0.5}},
		// whole numbers, repeats dropped: 1, 1.25, 1.5, 1.75, 2 round to 1, 1, 2, 2, 2.
		{1, 2, 5, true, []float64{1, 2}},
		{0, 0, 4, false, []float64{0}},
		{3, 9, 0, false, nil},
	} {
		if got := SweepValues(c.from, c.to, c.steps, c.integer); !slices.Equal(got, c.want) {
			t.Errorf("SweepValues(%v, %v, %d, %v) = %v, want %v", c.from, c.to, c.steps, c.integer, got, c.want)
		}
	}
}

// conclusion resolves one recording's readings, given as rhythms by role.
func conclusion(t *testing.T, first, second, adj overread.Rhythm) overread.Conclusion {
	t.Helper()
	var rs []overread.Reading
	for _, r := range []struct {
		role   overread.Role
		rhythm overread.Rhythm
	}{{overread.First, first}, {overread.Second, second}, {overread.Adjudication, adj}} {
		if r.rhythm != "" {
			rs = append(rs, overread.Reading{Role: r.role, Rhythm: r.rhythm, Confidence: overread.Certain})
		}
	}
	v, err := overread.Resolve(rs)
	if err != nil {
		t.Fatal(err)
	}
	return v
}

func TestCaseReference(t *testing.T) {
	af, sinus, other, un := overread.AF, overread.Sinus, overread.Other, overread.Uninterpretable
	for _, c := range []struct {
		name string
		recs [][3]overread.Rhythm // first, second, adjudication
		want Reference
	}{
		{"no reading", [][3]overread.Rhythm{{}}, RefNone},
		{"one reader: AF", [][3]overread.Rhythm{{af}}, RefAF},
		{"two agree on AF", [][3]overread.Rhythm{{af, af}}, RefAF},
		{"adjudicated sinus", [][3]overread.Rhythm{{sinus, other, sinus}}, RefNotAF},
		{"readers disagree", [][3]overread.Rhythm{{af, sinus}}, RefPending},
		{"uninterpretable", [][3]overread.Rhythm{{un}}, RefUninterpretable},
		{"uninterpretable, then sinus", [][3]overread.Rhythm{{un}, {sinus}}, RefNotAF},
		{"sinus, then AF", [][3]overread.Rhythm{{sinus}, {af}}, RefAF},
		{"disagreement and uninterpretable", [][3]overread.Rhythm{{af, sinus}, {un}}, RefUninterpretable},
	} {
		rc := ReferenceCase{}
		for _, r := range c.recs {
			rc.Recordings = append(rc.Recordings, ReferenceRecording{Conclusion: conclusion(t, r[0], r[1], r[2])})
		}
		if got := rc.Reference(); got != c.want {
			t.Errorf("%s: %d, want %d", c.name, got, c.want)
		}
	}
}

// tallyWeek is a 30-hour week of 5-minute windows of one pattern symbol
// (patternWeek: 'I' MASD 12 bpm, 'e' exactly 8, 'b' 7, 'r' 2).
func tallyWeek(t *testing.T, n int, symbol string) *cohort.Week {
	w := patternWeek(t, 0, strings.Repeat(symbol, 360))
	w.Week = n
	return &w
}

// TestSweepTallyOnHandWorkedWeeks: six participants with one week each,
// the weeks and over-reads of db's sweep test (TestSweepCountsFlagsPPVAndSensitivity)
// on one window size:
//
//	A: MASD 12, over-read AF            B: MASD exactly 8, adjudicated sinus
//	C: MASD 2, two readers agree on AF  D: MASD 2, no ECG
//	E: MASD 2, uninterpretable          F: MASD 2, readers disagree
//
// At thresholds 3 and 8 A and B flag (8 meets 8), at 30 nobody does.
func TestSweepTallyOnHandWorkedWeeks(t *testing.T) {
	p := oneRule()
	p.MinWearHours = 24
	tally, err := NewSweepTally(p, "windows[0].masd_threshold", []float64{3, 8, 30}, testNow)
	if err != nil {
		t.Fatal(err)
	}
	af, sinus, other, un := overread.AF, overread.Sinus, overread.Other, overread.Uninterpretable
	ref := func(pid int64, recs ...[3]overread.Rhythm) ReferenceCase {
		rc := ReferenceCase{ParticipantID: pid, FirstWeek: 1, LastWeek: 1}
		for _, r := range recs {
			rc.Recordings = append(rc.Recordings, ReferenceRecording{Conclusion: conclusion(t, r[0], r[1], r[2])})
		}
		return rc
	}
	tally.Refer([]ReferenceCase{ref(1, [3]overread.Rhythm{af}), ref(2, [3]overread.Rhythm{sinus, other, sinus}),
		ref(3, [3]overread.Rhythm{af, af}), ref(5, [3]overread.Rhythm{un}), ref(6, [3]overread.Rhythm{af, sinus})})
	for pid, sym := range []string{"I", "e", "r", "r", "r", "r"} {
		if err := tally.Add(int64(pid+1), tallyWeek(t, 1, sym)); err != nil {
			t.Fatal(err)
		}
	}
	if tally.Swept() != 0 {
		t.Errorf("%d weeks swept before the chunk is full", tally.Swept())
	}
	got, err := tally.Finish()
	if err != nil {
		t.Fatal(err)
	}
	if got.Weeks != 6 || got.ConfirmedWeeks != 2 || got.NotAFWeeks != 1 || got.UninterpretableWeeks != 1 || got.PendingWeeks != 1 {
		t.Fatalf("sweep %+v", got)
	}
	want := []struct {
		flagged int
		table   stats.Table2x2
	}{
		{2, stats.Table2x2{TP: 1, FP: 1, FN: 1, TN: 0}},
		{2, stats.Table2x2{TP: 1, FP: 1, FN: 1, TN: 0}},
		{0, stats.Table2x2{TP: 0, FP: 0, FN: 2, TN: 1}},
	}
	for i, w := range want {
		r := got.Rows[i]
		if r.Flagged != w.flagged || r.Table != w.table {
			t.Errorf("value %v: flagged %d table %+v; want %d %+v", r.Value, r.Flagged, r.Table, w.flagged, w.table)
		}
	}
	r := got.Rows[0]
	if r.PPV != (stats.Fraction{X: 1, N: 2}) || r.Sensitivity != (stats.Fraction{X: 1, N: 2}) || r.PPVCI == nil || r.SensitivityCI == nil {
		t.Fatalf("value 3: PPV %v sensitivity %v", r.PPV, r.Sensitivity)
	}
	// Wilson 95% interval of 1/2 (computed by hand from the score interval
	// of Newcombe 1998, method 3): with z = 1.959964, n = 2, p = 0.5,
	// (p + z^2/2n -+ z sqrt(p(1-p)/n + z^2/4n^2)) / (1 + z^2/n)
	// = (1.4604 -+ 1.1843) / 2.9207 = 0.0945 to 0.9055.
	if math.Abs(r.PPVCI.Lo-0.0945) > 5e-4 || math.Abs(r.PPVCI.Hi-0.9055) > 5e-4 {
		t.Fatalf("Wilson interval of 1/2: %+v", *r.PPVCI)
	}
	// Nothing flags at 30: no PPV and no interval; sensitivity 0/2 has one.
	if r := got.Rows[2]; r.PPV.N != 0 || r.PPVCI != nil || r.Sensitivity != (stats.Fraction{X: 0, N: 2}) || r.SensitivityCI == nil {
		t.Errorf("value 30: PPV %v (%v), sensitivity %v", r.PPV, r.PPVCI, r.Sensitivity)
	}
}

// TestSweepTallyReferenceCovers: a case's reference covers every week from
// its first to its last, and a week two cases cover takes the stronger.
func TestSweepTallyReferenceCovers(t *testing.T) {
	p := oneRule()
	p.MinWearHours = 24
	tally, err := NewSweepTally(p, "windows[0].masd_threshold", []float64{8}, testNow)
	if err != nil {
		t.Fatal(err)
	}
	tally.Refer([]ReferenceCase{
		{ParticipantID: 1, FirstWeek: 1, LastWeek: 3, Recordings: []ReferenceRecording{{Conclusion: conclusion(t, overread.Sinus, "", "")}}},
		{ParticipantID: 1, FirstWeek: 3, LastWeek: 3, Recordings: []ReferenceRecording{{Conclusion: conclusion(t, overread.AF, "", "")}}},
	})
	for w := range 5 {
		if err := tally.Add(1, tallyWeek(t, w, "I")); err != nil {
			t.Fatal(err)
		}
	}
	got, err := tally.Finish()
	if err != nil {
		t.Fatal(err)
	}
	// Weeks 1 and 2 not AF, week 3 AF (the stronger), weeks 0 and 4 none;
	// every week flags.
	if got.Weeks != 5 || got.NotAFWeeks != 2 || got.ConfirmedWeeks != 1 || got.Rows[0].Table != (stats.Table2x2{TP: 1, FP: 2}) {
		t.Errorf("sweep %+v", got)
	}
}

// TestSweepTallyBaseline: a participant's baseline comes from their own
// baseline weeks and applies to later weeks only. Baseline weeks 0 and 1 of
// MASD 7 give level 7; week 5 has MASD 8, so with thresholds max(8, f x 7)
// of 8, 10.5 and 14 for factors 1, 1.5 and 2 it flags at factor 1 only
// (hand-worked; TestSweepBaselineFactor shows the same with Sweep itself).
func TestSweepTallyBaseline(t *testing.T) {
	p := oneRule()
	p.MinWearHours = 24
	p.Baseline.Enabled = true // K = 2
	tally, err := NewSweepTally(p, "baseline.factor", []float64{1, 1.5, 2}, testNow)
	if err != nil {
		t.Fatal(err)
	}
	for _, w := range []*cohort.Week{tallyWeek(t, 0, "b"), tallyWeek(t, 1, "b"), tallyWeek(t, 5, "e")} {
		if err := tally.Add(7, w); err != nil {
			t.Fatal(err)
		}
	}
	got, err := tally.Finish()
	if err != nil {
		t.Fatal(err)
	}
	var flagged []int
	for _, r := range got.Rows {
		flagged = append(flagged, r.Flagged)
	}
	if got.Weeks != 3 || !slices.Equal(flagged, []int{1, 0, 0}) {
		t.Errorf("%d weeks, flagged %v; want 3 weeks, flagged [1 0 0]", got.Weeks, flagged)
	}
}

// TestSweepTallyChunks: across more weeks than one chunk holds, the tally
// counts exactly what Evaluate gives week by week, and its progress moves a
// chunk at a time.
func TestSweepTallyChunks(t *testing.T) {
	p := oneRule()
	p.MinWearHours = 1
	values := []float64{6, 10}
	tally, err := NewSweepTally(p, "windows[0].masd_threshold", values, testNow)
	if err != nil {
		t.Fatal(err)
	}
	const n = sweepChunk + 44
	symbols := []string{"I", "e", "b", "r"}
	want := make([]int, len(values))
	steps := map[int]bool{}
	for i := range n {
		w := patternWeek(t, 0, strings.Repeat(symbols[i%len(symbols)], 24)) // 2 h
		w.Week = 2
		for vi, v := range values {
			q, _ := p.With("windows[0].masd_threshold", v)
			res, err := Screen(&w, q, testNow, nil)
			if err != nil {
				t.Fatal(err)
			}
			if res.Verdict == Positive {
				want[vi]++
			}
		}
		if err := tally.Add(int64(i+1), &w); err != nil {
			t.Fatal(err)
		}
		steps[tally.Swept()] = true
	}
	got, err := tally.Finish()
	if err != nil {
		t.Fatal(err)
	}
	// 'I' (12), 'e' (8) and 'b' (7) flag at 6; only 'I' at 10 (hand-worked).
	if want[0] != 3*n/4 || want[1] != n/4 {
		t.Fatalf("Evaluate flags %v of %d", want, n)
	}
	if got.Weeks != n || got.Rows[0].Flagged != want[0] || got.Rows[1].Flagged != want[1] {
		t.Errorf("%d weeks, flagged %d and %d; want %d, %v", got.Weeks, got.Rows[0].Flagged, got.Rows[1].Flagged, n, want)
	}
	for s := range steps {
		if s != 0 && s < sweepChunk {
			t.Errorf("progress at %d weeks, before a chunk was full", s)
		}
	}
}

// TestSweepParams: every sweepable parameter of the default protocol, each
// window-level one for each of its two window sizes, and every one of them
// accepted by With.
func TestSweepParams(t *testing.T) {
	p := DefaultProtocol()
	got := SweepParams(p)
	perWindow := 0
	for _, sp := range Sweepable {
		if strings.Contains(sp, "windows[i]") {
			perWindow++
		}
	}
	if want := len(Sweepable) - perWindow + perWindow*len(p.Windows); len(got) != want || len(p.Windows) != 2 {
		t.Fatalf("%d parameters for %d windows, want %d", len(got), len(p.Windows), want)
	}
	if got[0] != (SweepParam{Path: "min_wear_hours", Window: -1}) || got[1] != (SweepParam{Path: "windows[0].masd_threshold", Window: 0}) ||
		got[2] != (SweepParam{Path: "windows[1].masd_threshold", Window: 1}) {
		t.Errorf("first parameters %v", got[:3])
	}
	for _, sp := range got {
		if _, err := p.With(sp.Path, 1); err != nil {
			t.Errorf("With(%s): %v", sp.Path, err)
		}
	}
}

// TestCaseReferenceCountsDiagnosticRecordingsOnly: a recording shorter than
// the 30 s a single-lead diagnosis needs is no reference, whatever its
// readings say, as in the screening cascade and the agreement statistics
// (overread.Conclusion.Diagnostic; the 30 s from the 2020 ESC AF
// guidelines, from memory).
func TestCaseReferenceCountsDiagnosticRecordingsOnly(t *testing.T) {
	short := func(r overread.Rhythm) ReferenceRecording {
		return ReferenceRecording{Conclusion: conclusion(t, r, "", ""), TooShort: true}
	}
	full := func(r overread.Rhythm) ReferenceRecording {
		return ReferenceRecording{Conclusion: conclusion(t, r, "", "")}
	}
	for _, c := range []struct {
		name string
		recs []ReferenceRecording
		want Reference
	}{
		{"a short AF recording", []ReferenceRecording{short(overread.AF)}, RefNone},
		{"a short uninterpretable recording", []ReferenceRecording{short(overread.Uninterpretable)}, RefNone},
		{"a short AF recording and a full sinus one", []ReferenceRecording{short(overread.AF), full(overread.Sinus)}, RefNotAF},
		{"a full AF recording", []ReferenceRecording{full(overread.AF)}, RefAF},
	} {
		if got := (ReferenceCase{Recordings: c.recs}).Reference(); got != c.want {
			t.Errorf("%s: %d, want %d", c.name, got, c.want)
		}
	}
}
