package screen

import (
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"reflect"
	"slices"
	"sort"
	"strings"
	"testing"

	"cohortdesk/cohort"
)

func TestProtocolValidate(t *testing.T) {
	if err := DefaultProtocol().Validate(); err != nil {
		t.Fatalf("DefaultProtocol().Validate() = %v", err)
	}
	tests := []struct {
		name   string
		edit   func(*Protocol)
		fields []string
	}{
		{"min bpm zero", func(p *Protocol) { p.MinBPM = 0 }, []string{"min_bpm"}},
		{"bounds crossed", func(p *Protocol) { p.MaxBPM = 20 }, []string{"max_bpm"}},
		{"window minutes", func(p *Protocol) { p.Windows[1].Minutes = 0 }, []string{"windows[1].minutes"}},
		{"window repeated", func(p *Protocol) { p.Windows[1].Minutes = 5; p.Windows[1].MaxGapSeconds = 60 }, []string{"windows[1].minutes"}},
		{"threshold", func(p *Protocol) { p.Windows[0].MASDThreshold = math.NaN() }, []string{"windows[0].masd_threshold"}},
		{"gap beyond window", func(p *Protocol) { p.Windows[0].MaxGapSeconds = 301 }, []string{"windows[0].max_gap_seconds"}},
		{"one reading", func(p *Protocol) { p.Windows[0].MinReadings = 1 }, []string{"windows[0].min_readings"}},
		{"negative steps", func(p *Protocol) { p.Windows[0].MaxSteps = -1 }, []string{"windows[0].max_steps"}},
		{"share above 1", func(p *Protocol) { p.Windows[1].MinShare = 1.5 }, []string{"windows[1].min_share"}},
		{"run too long", func(p *Protocol) { p.Windows[1].RunLength = 400 }, []string{"windows[1].run_length"}},
		{"wear", func(p *Protocol) { p.MinWearHours = 0 }, []string{"min_wear_hours"}},
		{"rr params", func(p *Protocol) { p.RR.Bins = 1 }, []string{"rr.bins"}},
		{"rr join", func(p *Protocol) { p.RR.MaxJoinErrorMs = -5 }, []string{"rr.max_join_error_ms"}},
		{"rr min segments", func(p *Protocol) { p.RR.MinAFLikeSegments = 0 }, []string{"rr.min_af_like_segments"}},
		{"baseline weeks", func(p *Protocol) { p.Baseline.Weeks = 0 }, []string{"baseline.weeks"}},
		{"baseline factor", func(p *Protocol) { p.Baseline.Factor = -1 }, []string{"baseline.factor"}},
		{"nothing can flag", func(p *Protocol) {
			p.RR.Enabled = false
			for i := range p.Windows {
				p.Windows[i].RunLength, p.Windows[i].MinShare = 0, 0
			}
		}, []string{"windows"}},
		{"several at once", func(p *Protocol) { p.MinBPM = -3; p.Windows[0].MinReadings = 0 }, []string{"min_bpm", "windows[0].min_readings"}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			p := DefaultProtocol()
			tc.edit(&p)
			err := p.Validate()
			var ve *cohort.ValidationError
			if !errors.As(err, &ve) {
				t.Fatalf("Validate() = %v, want *cohort.ValidationError", err)
			}
			got := make([]string, 0, len(ve.Fields))
			for k, msg := range ve.Fields {
				got = append(got, k)
				if msg == "" {
					t.Errorf("field %s has an empty message", k)
				}
			}
			sort.Strings(got)
			if !slices.Equal(got, tc.fields) {
				t.Errorf("fields = %v, want %v", got, tc.fields)
			}
		})
	}
}

func TestProtocolJSON(t *testing.T) {
	p := DefaultProtocol()
	b, err := json.Marshal(p)
	if err != nil {
		t.Fatal(err)
	}
	var back Protocol
	if err := json.Unmarshal(b, &back); err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(p, back) {
		t.Errorf("protocol does not survive a JSON round trip:\n%s", b)
	}
	// Every path Diff and Validate use must be a JSON path of the stored form.
	var m any
	if err := json.Unmarshal(b, &m); err != nil {
		t.Fatal(err)
	}
	var jsonPaths []string
	var walk func(v any, path string)
	walk = func(v any, path string) {
		switch x := v.(type) {
		case map[string]any:
			for k, c := range x {
				if path != "" {
					k = path + "." + k
				}
				walk(c, k)
			}
		case []any:
			for i, c := range x {
				walk(c, fmt.Sprintf("%s[%d]", path, i))
			}
		default:
			jsonPaths = append(jsonPaths, path)
		}
	}
	walk(m, "")
	var flat []string
	for _, kv := range p.Params() {
		flat = append(flat, kv.Path)
	}
	sort.Strings(jsonPaths)
	sort.Strings(flat)
	if !slices.Equal(jsonPaths, flat) {
		t.Errorf("Params paths %v\ndiffer from JSON paths %v", flat, jsonPaths)
	}
	if !slices.Contains(flat, "rr.segment_beats") {
		t.Errorf("rr parameters are not inline: %v", flat)
	}
}

func TestProtocolDiff(t *testing.T) {
	old := DefaultProtocol()
	if got := old.Diff(DefaultProtocol()); len(got) != 0 {
		t.Errorf("Diff of equal protocols = %v, want none", got)
	}
	next := DefaultProtocol()
	next.Windows[0].MASDThreshold = 9.5
	next.RR.SegmentBeats = 64
	next.Baseline.Enabled = true
	next.Windows = append(next.Windows, WindowRule{Minutes: 60, MASDThreshold: 6, MaxGapSeconds: 600, MinReadings: 6, MaxSteps: 600, RunLength: 1, MinShare: 0.1})
	want := []Change{
		{"windows[0].masd_threshold", "8", "9.5"},
		{"rr.segment_beats", "128", "64"},
		{"baseline.enabled", "false", "true"},
		{"windows[2].minutes", Absent, "60"},
		{"windows[2].masd_threshold", Absent, "6"},
		{"windows[2].max_gap_seconds", Absent, "600"},
		{"windows[2].min_readings", Absent, "6"},
		{"windows[2].max_steps", Absent, "600"},
		{"windows[2].run_length", Absent, "1"},
		{"windows[2].min_share", Absent, "0.1"},
	}
	if got := old.Diff(next); !reflect.DeepEqual(got, want) {
		t.Errorf("Diff =\n%v\nwant\n%v", got, want)
	}
	// The reverse shows the window size as removed, in the order of the
	// newer protocol's fields.
	back := next.Diff(old)
	if len(back) != len(want) || back[1] != (Change{"windows[2].minutes", "60", Absent}) {
		t.Errorf("reverse Diff = %v", back)
	}
}

func TestProtocolWith(t *testing.T) {
	p := DefaultProtocol()
	orig := p.Windows[1].RunLength
	q, err := p.With("windows[1].run_length", float64(orig+5))
	if err != nil {
		t.Fatal(err)
	}
	if q.Windows[1].RunLength != orig+5 || p.Windows[1].RunLength != orig {
		t.Errorf("With changed %d (original now %d), want %d with the original kept at %d", q.Windows[1].RunLength, p.Windows[1].RunLength, orig+5, orig)
	}
	for _, bad := range []struct {
		param string
		value float64
	}{
		{"windows[0].minutes", 10},        // changes the summaries: not sweepable
		{"windows[7].masd_threshold", 10}, // no such window
		{"windows[0].run_length", 2.5},    // not a whole number
		{"rr.segment_beats", 64},          // changes the segments
		{"max_bpm", 200},                  // changes the cleaning
	} {
		if _, err := p.With(bad.param, bad.value); err == nil {
			t.Errorf("With(%s, %v): no error", bad.param, bad.value)
		}
	}
	// Every listed sweepable parameter can be set.
	for _, s := range Sweepable {
		param := strings.Replace(s, "[i]", "[0]", 1)
		if _, err := p.With(param, 1); err != nil {
			t.Errorf("With(%s): %v", param, err)
		}
	}
}

func TestSweep(t *testing.T) {
	p := DefaultProtocol()
	var weeks []*Prepared
	for i, s := range []synth{
		{seed: 41, rhythm: afLike, cadenceMs: 10_000},
		{seed: 42, rhythm: sinus, cadenceMs: 10_000},
		{seed: 43, rhythm: afLike, cadenceMs: 10_000, wearHours: 12},
		{seed: 44, rhythm: sinus, cadenceMs: 10_000, walks: 6},
	} {
		w := synthWeek(t, s)
		w.Week = 10 + i
		c, _ := Clean(&w, p, testNow)
		weeks = append(weeks, Prepare(&c, p))
	}
	values := []float64{0.5, 4, 8, 12, 16, 20, 40}
	got, err := Sweep(weeks, nil, p, "windows[0].masd_threshold", values)
	if err != nil {
		t.Fatal(err)
	}
	prevPos := len(weeks) + 1
	for vi, v := range values {
		q, _ := p.With("windows[0].masd_threshold", v)
		pos := 0
		for wi, pr := range weeks {
			res, err := Evaluate(pr, q, nil)
			if err != nil {
				t.Fatal(err)
			}
			if got[vi][wi] != res.Verdict {
				t.Errorf("threshold %v week %d: sweep %s, Evaluate %s", v, wi, got[vi][wi], res.Verdict)
			}
			if res.Verdict == Positive {
				pos++
			}
		}
		// Raising a threshold can only remove positives (hand-worked from
		// the definitions: fewer irregular windows, shorter runs).
		if pos > prevPos {
			t.Errorf("threshold %v gives %d positives, more than %d at the lower threshold", v, pos, prevPos)
		}
		prevPos = pos
	}
	// At 0.5 bpm the sinus week is positive on its 5-minute windows; at the
	// default 8 only the af-like week with full wear is (hand-worked from the
	// synthetic rhythms: sinus MASD about 1 bpm, af-like about 17 bpm); the
	// 12-hour week is insufficient throughout.
	if got[0][1] != Positive || got[2][0] != Positive || got[2][1] != Negative || got[2][2] != Insufficient {
		t.Errorf("verdicts at 0.5 and 8 bpm: %v %v", got[0], got[2])
	}
	// 40 bpm on 5-minute windows leaves the 30-minute windows to flag the
	// af-like week (their 7 bpm threshold is unchanged).
	if got[6][0] != Positive || got[6][1] != Negative {
		t.Errorf("verdicts at 40 bpm: %v", got[6])
	}

	for _, bad := range []struct {
		name, param string
		values      []float64
		bases       []*Baseline
	}{
		{"unsweepable", "windows[0].minutes", []float64{10}, nil},
		{"invalid value", "windows[0].masd_threshold", []float64{8, -1}, nil},
		{"bases mismatch", "min_wear_hours", []float64{8}, []*Baseline{nil}},
	} {
		if _, err := Sweep(weeks, bad.bases, p, bad.param, bad.values); err == nil {
			t.Errorf("%s: no error", bad.name)
		}
	}
}

func TestSweepBaselineFactor(t *testing.T) {
	p := oneRule()
	p.Baseline.Enabled = true
	w := patternWeek(t, 0, strings.Repeat("e", 360)) // MASD exactly 8, 30 h
	w.Week = 5
	c, _ := Clean(&w, p, testNow)
	pr := Prepare(&c, p)
	base := &Baseline{Wanted: 2, Weeks: 2, Minutes: []int{5}, Level: []float64{6}}
	got, err := Sweep([]*Prepared{pr}, []*Baseline{base}, p, "baseline.factor", []float64{1, 1.5, 2})
	if err != nil {
		t.Fatal(err)
	}
	// hand-worked: thresholds max(8, f x 6) = 8, 9, 12 against MASD 8.
	want := []Verdict{Positive, Negative, Negative}
	for i := range want {
		if got[i][0] != want[i] {
			t.Errorf("factor row %d: %s, want %s", i, got[i][0], want[i])
		}
	}
}

// Every parameter of the default protocol and every sweepable one has its
// own words, and a window-level sweep parameter names its window size.
func TestParamLabels(t *testing.T) {
	p := DefaultProtocol()
	for _, kv := range p.Params() {
		if l := ParamLabel(kv.Path); l == kv.Path || l == "" {
			t.Errorf("parameter %s has no label", kv.Path)
		}
	}
	for _, sp := range SweepParams(p) {
		l := sp.Label(p)
		if strings.Contains(l, sp.Path) {
			t.Errorf("sweep parameter %s has no label: %q", sp.Path, l)
		}
		if sp.Window >= 0 && !strings.HasPrefix(l, fmt.Sprintf("%d-minute windows: ", p.Windows[sp.Window].Minutes)) {
			t.Errorf("sweep parameter %s: %q does not name its window", sp.Path, l)
		}
	}
	if got := ParamLabel("no.such_thing"); got != "no.such_thing" {
		t.Errorf("unknown path labelled %q", got)
	}
}
