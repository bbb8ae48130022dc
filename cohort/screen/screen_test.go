package screen

import (
	"bytes"
	"encoding/json"
	"errors"
	"math/rand/v2"
	"strings"
	"testing"

	"cohortdesk/cohort"
)

// patternWeek fills consecutive 5-minute windows, starting at window offset,
// with readings every 10 s whose MASD is set by each symbol (hand-worked by
// fillWindows' alternating values): 'I' 12 bpm, 'e' exactly 8 bpm (the
// default threshold), 'b' 7 bpm, 'r' 2 bpm, 'a' 12 bpm but 1000 steps
// (active), '.' no readings.
func patternWeek(tb testing.TB, offset int, pattern string) cohort.Week {
	tb.Helper()
	w := emptyWeek()
	for k, c := range pattern {
		wi := offset + k
		switch c {
		case 'I', 'a':
			fillWindows(&w, 5, wi, wi+1, 70, 12, 10_000)
		case 'e':
			fillWindows(&w, 5, wi, wi+1, 70, 8, 10_000)
		case 'b':
			fillWindows(&w, 5, wi, wi+1, 70, 7, 10_000)
		case 'r':
			fillWindows(&w, 5, wi, wi+1, 70, 2, 10_000)
		case '.':
		default:
			tb.Fatalf("patternWeek: unknown symbol %q", c)
		}
		if c == 'a' {
			ws := w.Start + int64(wi)*5*minuteMs
			w.Steps.AppendInterval(ws, ws+5*minuteMs, 1000)
		}
	}
	return w
}

func mustScreen(tb testing.TB, w *cohort.Week, p Protocol, base *Baseline) Result {
	tb.Helper()
	res, err := Screen(w, p, testNow, base)
	if err != nil {
		tb.Fatalf("Screen: %v", err)
	}
	return res
}

func TestRuns(t *testing.T) {
	p := oneRule()
	p.MinWearHours = 0.1
	tests := []struct {
		name                                        string
		offset                                      int
		pattern                                     string
		wantUsable, wantIrregular, wantRun, wantAct int
	}{
		// hand-worked counts for each pattern.
		{"single run", 0, "rrIIIrr", 7, 3, 3, 0},
		{"two runs", 0, "IIrIII", 6, 5, 3, 0},
		// an empty window ends a run even though the windows around it are irregular
		{"empty window breaks", 0, "II.II", 4, 4, 2, 0},
		// an active window is unusable and ends the run
		{"active window breaks", 0, "IIaII", 4, 4, 2, 1},
		// MASD exactly at the threshold is irregular; 7 < 8 is not
		{"at threshold", 0, "eeebee", 6, 5, 3, 0},
		// windows 286-289 straddle midnight (window 288); the run continues
		{"across midnight", 286, "IIII", 4, 4, 4, 0},
		// the last three windows of the week (2013-2015)
		{"end of week", 2013, "rII", 3, 2, 2, 0},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			w := patternWeek(t, tc.offset, tc.pattern)
			res := mustScreen(t, &w, p, nil)
			got := res.Windows[0]
			if got.Usable != tc.wantUsable || got.Irregular != tc.wantIrregular || got.LongestRun != tc.wantRun || got.Active != tc.wantAct {
				t.Errorf("usable %d irregular %d run %d active %d, want %d %d %d %d",
					got.Usable, got.Irregular, got.LongestRun, got.Active, tc.wantUsable, tc.wantIrregular, tc.wantRun, tc.wantAct)
			}
			if sum := got.Empty + got.TooFew + got.Gappy + got.Active + got.Usable; sum != got.Windows || got.Windows != 2016 {
				t.Errorf("window classes sum to %d of %d, want 2016", sum, got.Windows)
			}
		})
	}
}

// gapsWeek has five 5-minute windows of readings: usable, gappy, too few,
// and two usable ones whose readings a long gap separates.
func gapsWeek() cohort.Week {
	s := testStart
	l := 5 * minuteMs
	w := emptyWeek()
	// window 0: gap of exactly 60 s, the limit: usable (hand-worked)
	for _, dt := range []int64{0, 10_000, 70_000, 80_000, 90_000} {
		w.HR.Append(s+dt, 70)
	}
	// window 1: one gap of 60.001 s: gappy (hand-worked)
	for _, dt := range []int64{0, 10_000, 70_001, 80_000, 90_000} {
		w.HR.Append(s+l+dt, 70)
	}
	// window 2: 4 readings, one fewer than the default 5: too few (hand-worked)
	for _, dt := range []int64{0, 10_000, 20_000, 30_000} {
		w.HR.Append(s+2*l+dt, 70)
	}
	// windows 3 and 4: a long gap between the last reading of window 3 and
	// the first of window 4 is no gap of either window (hand-worked).
	for _, dt := range []int64{0, 10_000, 20_000, 30_000, 40_000, 2*l - 40_000, 2*l - 30_000, 2*l - 20_000, 2*l - 10_000, 2*l - 1} {
		w.HR.Append(s+3*l+dt, 70)
	}
	return w
}

func TestGapsAndTooFew(t *testing.T) {
	p := oneRule()
	p.MinWearHours = 0.1
	w := gapsWeek()
	res := mustScreen(t, &w, p, nil)
	got := res.Windows[0]
	if got.Usable != 3 || got.Gappy != 1 || got.TooFew != 1 {
		t.Errorf("usable %d gappy %d too few %d, want 3, 1, 1", got.Usable, got.Gappy, got.TooFew)
	}
	// hand-worked: 3 usable 5-minute windows are 0.25 h of wear.
	if got.UsableHours != 0.25 || res.WearHours != 0.25 {
		t.Errorf("usable hours %v wear %v, want 0.25", got.UsableHours, res.WearHours)
	}
}

func TestStepExclusionThreshold(t *testing.T) {
	p := oneRule()
	p.MinWearHours = 0.1
	for _, tc := range []struct {
		steps      int32
		wantActive int
	}{
		// hand-worked: 600 steps over the hour are 50 per 5-minute window, at
		// the default limit of 50: not active.
		{600, 0},
		// hand-worked: 601 steps are 50.08 per window: all 12 windows active.
		{601, 12},
	} {
		w := patternWeek(t, 0, strings.Repeat("r", 12))
		w.Steps.AppendInterval(testStart, testStart+hourMs, tc.steps)
		res := mustScreen(t, &w, p, nil)
		if got := res.Windows[0].Active; got != tc.wantActive {
			t.Errorf("steps %d: active %d, want %d", tc.steps, got, tc.wantActive)
		}
	}
}

func TestVerdicts(t *testing.T) {
	p := oneRule()
	p.MinWearHours = 8
	p.Windows[0].RunLength = 6
	p.Windows[0].MinShare = 0.2
	tests := []struct {
		name    string
		pattern string
		want    Verdict
		reason  string
	}{
		{
			// hand-worked: 6 + 8 = 14 irregular of 6 + 10 + 16 + 64 = 96
			// usable windows (8 h); the run of 6 meets the limit; 14.6% is
			// below the 20% share.
			name:    "positive by run",
			pattern: "IIIIII" + strings.Repeat("r", 10) + strings.Repeat("Ir", 8) + strings.Repeat("r", 64),
			want:    Positive,
			reason:  "positive by run of 6 irregular 5-minute windows (limit 6) in 8.0 h usable wear; 14 of 96 usable 5-minute windows irregular; longest run 6",
		},
		{
			// hand-worked: 24 of 96 = 25.0% irregular, never two in a row.
			name:    "positive by share",
			pattern: strings.Repeat("Irrr", 24),
			want:    Positive,
			reason:  "positive by 25.0% of usable 5-minute windows irregular (limit 20%) in 8.0 h usable wear; 24 of 96 usable 5-minute windows irregular; longest run 1",
		},
		{
			// hand-worked: 5 scattered irregular of 96 (5.2%), runs of 1.
			name:    "negative",
			pattern: strings.Repeat("Irrrrrrrrrrrrrrrrrr", 5) + "r",
			want:    Negative,
			reason:  "no criterion met in 8.0 h usable wear; 5 of 96 usable 5-minute windows irregular; longest run 1",
		},
		{
			// hand-worked: 36 usable windows are 3 h, below 8 h, so even a run
			// of 10 decides nothing.
			name:    "insufficient",
			pattern: strings.Repeat("I", 10) + strings.Repeat("r", 26),
			want:    Insufficient,
			reason:  "insufficient data: 3.0 h usable wear, needs 8 h; 10 of 36 usable 5-minute windows irregular; longest run 10",
		},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			w := patternWeek(t, 100, tc.pattern)
			res := mustScreen(t, &w, p, nil)
			if res.Verdict != tc.want {
				t.Errorf("verdict = %s, want %s (%s)", res.Verdict, tc.want, res.Reason)
			}
			if res.Reason != tc.reason {
				t.Errorf("reason =\n  %q\nwant\n  %q", res.Reason, tc.reason)
			}
			if tc.want == Insufficient && (res.Windows[0].RunMet || res.Windows[0].ShareMet) {
				t.Errorf("insufficient week has a criterion met")
			}
		})
	}
}

func TestSyntheticWeeks(t *testing.T) {
	p := DefaultProtocol()
	tests := []struct {
		name   string
		s      synth
		want   Verdict
		reason string // prefix
	}{
		{"af-like", synth{seed: 21, rhythm: afLike, cadenceMs: 5_000}, Positive, "positive by run of"},
		{"sinus", synth{seed: 22, rhythm: sinus, cadenceMs: 5_000}, Negative, "no criterion met in 168.0 h"},
		{"sinus with walks", synth{seed: 23, rhythm: sinus, cadenceMs: 5_000, walks: 5}, Negative, "no criterion met"},
		// 10 hours of readings cannot reach 24 h of usable wear.
		{"short wear", synth{seed: 24, rhythm: afLike, cadenceMs: 5_000, wearHours: 10}, Insufficient, "insufficient data: 10.0 h usable wear, needs 24 h"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			w := synthWeek(t, tc.s)
			res := mustScreen(t, &w, p, nil)
			if res.Verdict != tc.want || !strings.HasPrefix(res.Reason, tc.reason) {
				t.Errorf("verdict %s reason %q, want %s and reason starting %q", res.Verdict, res.Reason, tc.want, tc.reason)
			}
			if tc.s.walks > 0 && res.Windows[0].Active == 0 {
				t.Errorf("walks made no window active")
			}
		})
	}
}

func TestScreenErrors(t *testing.T) {
	w := emptyWeek()
	bad := DefaultProtocol()
	bad.MinWearHours = -1
	_, err := Screen(&w, bad, testNow, nil)
	var ve *cohort.ValidationError
	if !errors.As(err, &ve) || ve.Fields["min_wear_hours"] == "" {
		t.Errorf("Screen with a bad protocol: %v, want a validation error on min_wear_hours", err)
	}
	w.End = w.Start
	if _, err := Screen(&w, DefaultProtocol(), testNow, nil); err == nil || !strings.Contains(err.Error(), "week 3") {
		t.Errorf("Screen of an empty week span: %v, want an error naming week 3", err)
	}
	w = emptyWeek()
	w.End = w.Start + 9*24*hourMs
	if _, err := Screen(&w, DefaultProtocol(), testNow, nil); err == nil {
		t.Errorf("Screen of a 9-day week: no error")
	}
	// a week prepared under one window set cannot be judged under another
	w = emptyWeek()
	pr := Prepare(&w, DefaultProtocol())
	if _, err := Evaluate(pr, oneRule(), nil); err == nil {
		t.Errorf("Evaluate with other window sizes: no error")
	}
}

// rrWeek appends RR intervals as consecutive beats from at: each beat's time
// is the previous beat's time plus its interval.
func appendBeats(s *cohort.Samples, at int64, rrs []int32) int64 {
	for _, v := range rrs {
		at += int64(v)
		s.Append(at, v)
	}
	return at
}

func uniformRR(n int, seed uint64) []int32 {
	rng := rand.New(rand.NewPCG(seed, 7))
	out := make([]int32, n)
	for i := range out {
		out[i] = int32(400 + rng.IntN(801)) // independent, 400-1200 ms
	}
	return out
}

func steadyRR(n int) []int32 {
	out := make([]int32, n)
	for i := range out {
		out[i] = int32(800 + 10*(i%3)) // 800, 810, 820: small and regular
	}
	return out
}

func TestRRSegmentsInWeek(t *testing.T) {
	p := DefaultProtocol()
	p.Windows = p.Windows[:1]
	p.MinWearHours = 8
	tests := []struct {
		name         string
		build        func(s *cohort.Samples)
		wantRuns     int
		wantSegments int
		wantVerdict  Verdict
	}{
		{
			// hand-worked: 400 consecutive beats make 3 segments of 128.
			name:         "one run",
			build:        func(s *cohort.Samples) { appendBeats(s, testStart, steadyRR(400)) },
			wantRuns:     1,
			wantSegments: 3,
			wantVerdict:  Negative,
		},
		{
			// hand-worked: a missed beat (1 s more between two beats than the
			// interval says) splits 200 + 200 beats: one segment from each run.
			name: "missed beat splits",
			build: func(s *cohort.Samples) {
				at := appendBeats(s, testStart, steadyRR(200))
				appendBeats(s, at+1000, steadyRR(200))
			},
			wantRuns:     2,
			wantSegments: 2,
			wantVerdict:  Negative,
		},
		{
			// hand-worked: 20 ms of timing jitter is within the 50 ms join
			// tolerance, so the 400 beats stay one run.
			name: "jitter joins",
			build: func(s *cohort.Samples) {
				at := testStart
				for i, v := range steadyRR(400) {
					at += int64(v)
					s.Append(at+int64(20*(i%2)), v)
				}
			},
			wantRuns:     1,
			wantSegments: 3,
			wantVerdict:  Negative,
		},
		{
			// 2560 independent uniform beats: 20 segments, most AF-like
			// (see package rr), at least the 3 needed.
			name:         "af-like beats",
			build:        func(s *cohort.Samples) { appendBeats(s, testStart, uniformRR(2560, 1)) },
			wantRuns:     1,
			wantSegments: 20,
			wantVerdict:  Positive,
		},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			// 24 h of regular heart rate so the week has enough wear.
			w := patternWeek(t, 0, strings.Repeat("r", 288))
			tc.build(&w.RR)
			res := mustScreen(t, &w, p, nil)
			if res.RR == nil {
				t.Fatal("no RR result with the method on")
			}
			if res.RR.Runs != tc.wantRuns || res.RR.Segments != tc.wantSegments {
				t.Errorf("runs %d segments %d, want %d and %d", res.RR.Runs, res.RR.Segments, tc.wantRuns, tc.wantSegments)
			}
			if res.Verdict != tc.wantVerdict {
				t.Errorf("verdict %s, want %s (%s)", res.Verdict, tc.wantVerdict, res.Reason)
			}
			if tc.wantVerdict == Positive && (!res.RR.Met || !strings.Contains(res.Reason, "AF-like RR segments (limit 3)")) {
				t.Errorf("positive by RR but Met %v, reason %q", res.RR.Met, res.Reason)
			}
		})
	}
}

// TestRRWearAlone checks that RR segments count as wear, and that a window
// size's share criterion needs that size's own wear.
func TestRRWearAlone(t *testing.T) {
	p := DefaultProtocol()
	p.Windows = p.Windows[:1]
	p.Windows[0].RunLength = 0 // share only
	p.MinWearHours = 8
	// 3 h of irregular heart rate: share 100% but only 3 h of windows.
	w := patternWeek(t, 0, strings.Repeat("I", 36))
	// hand-worked: 36,864 steady beats of about 810 ms are 288 segments,
	// 288 x 128 x 810 ms = 8.29 h of RR wear.
	appendBeats(&w.RR, testStart+4*hourMs, steadyRR(288*128))
	res := mustScreen(t, &w, p, nil)
	if res.Verdict != Negative || res.Windows[0].ShareMet {
		t.Errorf("verdict %s share met %v, want negative without the share criterion (%s)", res.Verdict, res.Windows[0].ShareMet, res.Reason)
	}
	if res.WearHours < 8 || res.WearHours != res.RR.Hours {
		t.Errorf("wear %v h, RR %v h: want the RR hours, above 8", res.WearHours, res.RR.Hours)
	}
}

func TestDeterminism(t *testing.T) {
	p := DefaultProtocol()
	w := synthWeek(t, synth{seed: 31, rhythm: afLike, cadenceMs: 15_000, walks: 2})
	appendBeats(&w.RR, testStart+hourMs, uniformRR(1000, 2))
	a, err := json.Marshal(mustScreen(t, &w, p, nil))
	if err != nil {
		t.Fatal(err)
	}
	b, err := json.Marshal(mustScreen(t, &w, p, nil))
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(a, b) {
		t.Errorf("same input and protocol gave different JSON")
	}
	for _, key := range []string{`"input_digest":"`, `"longest_run":`, `"verdict":"positive"`, `"af_like":`, `"outside_week":`} {
		if !bytes.Contains(a, []byte(key)) {
			t.Errorf("result JSON lacks %s", key)
		}
	}
	var back Result
	if err := json.Unmarshal(a, &back); err != nil {
		t.Fatal(err)
	}
	c, _ := json.Marshal(back)
	if !bytes.Equal(a, c) {
		t.Errorf("result JSON does not survive a round trip")
	}
	cleaned, _ := Clean(&w, p, testNow)
	if back.InputDigest != InputDigest(&cleaned) {
		t.Errorf("input_digest is not the digest of the cleaned week")
	}
	w.HR.V[100]++
	d, _ := json.Marshal(mustScreen(t, &w, p, nil))
	var changed Result
	_ = json.Unmarshal(d, &changed)
	if changed.InputDigest == back.InputDigest {
		t.Errorf("digest unchanged after one reading changed")
	}
}

func TestBaseline(t *testing.T) {
	p := oneRule()
	p.Baseline.Enabled = true // K = 2, factor 1.5
	p.MinWearHours = 24
	day := strings.Repeat
	week := func(n int, masd rune) cohort.Week {
		w := patternWeek(t, 0, day(string(masd), 360)) // 30 h
		w.Week = n
		return w
	}
	// 'b' windows have MASD 7 (below 8), 'e' exactly 8, 'I' 12.
	screenOf := func(w cohort.Week, base *Baseline) Result {
		t.Helper()
		return mustScreen(t, &w, p, base)
	}
	w0, w1 := screenOf(week(0, 'b'), nil), screenOf(week(1, 'b'), nil)
	if w0.Baseline == nil || w0.Baseline.Status != "baseline_week" || w0.Verdict != Negative {
		t.Fatalf("baseline week: %+v %s", w0.Baseline, w0.Verdict)
	}
	base, err := NewBaseline(p, []Result{w0, w1})
	if err != nil {
		t.Fatal(err)
	}
	// hand-worked: every usable window of both weeks has MASD 7, so the
	// level is 7 and the personal threshold max(8, 1.5 x 7) = 10.5 bpm.
	if !base.Established() || base.Weeks != 2 || base.Level[0] != 7 {
		t.Fatalf("baseline = %+v, want established on 2 weeks at level 7", base)
	}
	tests := []struct {
		name    string
		w       cohort.Week
		base    *Baseline
		want    Verdict
		status  string
		thresh  float64
		snippet string
	}{
		// hand-worked: MASD 8 meets the absolute 8 but not the personal 10.5.
		{"quieted", week(5, 'e'), base, Negative, "applied", 10.5, "personal thresholds: 5-minute 10.50 bpm (baseline 7.00 x 1.5)"},
		// hand-worked: MASD 12 exceeds 10.5.
		{"still flagged", week(6, 'I'), base, Positive, "applied", 10.5, "personal thresholds"},
		{"not supplied", week(5, 'e'), nil, Positive, "not_supplied", 8, "no baseline supplied: absolute thresholds"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			res := screenOf(tc.w, tc.base)
			if res.Verdict != tc.want || res.Baseline.Status != tc.status || res.Windows[0].Threshold != tc.thresh {
				t.Errorf("verdict %s status %s threshold %v, want %s %s %v", res.Verdict, res.Baseline.Status, res.Windows[0].Threshold, tc.want, tc.status, tc.thresh)
			}
			if !strings.Contains(res.Reason, tc.snippet) {
				t.Errorf("reason %q lacks %q", res.Reason, tc.snippet)
			}
		})
	}

	// A positive baseline week is not learnt as normal: not established.
	w1pos := screenOf(week(1, 'I'), nil)
	weak, err := NewBaseline(p, []Result{w0, w1pos})
	if err != nil {
		t.Fatal(err)
	}
	res := screenOf(week(5, 'e'), weak)
	if weak.Established() || res.Baseline.Status != "not_established" || res.Verdict != Positive {
		t.Errorf("with a positive baseline week: established %v status %s verdict %s, want not established and positive",
			weak.Established(), res.Baseline.Status, res.Verdict)
	}
	if !strings.Contains(res.Reason, "baseline not established (1 of 2 baseline weeks negative)") {
		t.Errorf("reason %q", res.Reason)
	}

	// Input errors.
	w5 := screenOf(week(5, 'b'), nil)
	off := p
	off.Baseline.Enabled = false
	for name, call := range map[string]func() error{
		"week outside":   func() error { _, err := NewBaseline(p, []Result{w0, w5}); return err },
		"week twice":     func() error { _, err := NewBaseline(p, []Result{w0, w0}); return err },
		"baseline off":   func() error { _, err := NewBaseline(off, []Result{w0}); return err },
		"base given off": func() error { w := week(5, 'b'); _, err := Screen(&w, off, testNow, base); return err },
		"other windows": func() error {
			_, err := NewBaseline(p, []Result{{Week: 0, Windows: []WindowResult{{Minutes: 30}}}})
			return err
		},
	} {
		if err := call(); err == nil {
			t.Errorf("%s: no error", name)
		}
	}
}

// The verdict's label is its stored word (pages, summaries and the referral
// digest show these words unchanged); an unscreened week has none, and an
// unknown value shows quoted rather than passing for a verdict.
func TestVerdictLabel(t *testing.T) {
	for v, want := range map[Verdict]string{Positive: "positive", Negative: "negative", Insufficient: "insufficient", "": "", "maybe": `"maybe"`} {
		if got := v.Label(); got != want {
			t.Errorf("Verdict(%q).Label() = %q, want %q", string(v), got, want)
		}
	}
}
