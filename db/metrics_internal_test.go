package db

import (
	"encoding/json"
	"testing"

	"cohortdesk/cohort/rr"
	"cohortdesk/cohort/screen"
)

// TestMetricsWordAResult: a stored screening result is worded per window
// size and for the beat intervals; the digest and empty beat-interval
// figures are left out; a document of another shape shows its scalars.
func TestMetricsWordAResult(t *testing.T) {
	res := screen.Result{
		Week: 10, Verdict: screen.Positive, InputDigest: "ccbd0d73",
		Windows: []screen.WindowResult{
			{Minutes: 5, Threshold: 9, Usable: 200, Irregular: 0, LongestRun: 0, MeanMASD: 2.25, MedianMASD: 2},
			{Minutes: 30, Threshold: 9, Usable: 260, Irregular: 44, Share: 44.0 / 260, LongestRun: 30, MeanMASD: 6.5, MedianMASD: 4.125},
		},
		RR: &screen.RRResult{Beats: 0},
	}
	raw, err := json.Marshal(res)
	if err != nil {
		t.Fatal(err)
	}
	want := []Metric{
		{"5-minute windows", "0 of 200 usable irregular (0%), longest run 0; MASD mean 2.25, median 2 bpm, threshold 9"},
		{"30-minute windows", "44 of 260 usable irregular (16.9%), longest run 30; MASD mean 6.5, median 4.125 bpm, threshold 9"},
	}
	got := metrics(raw)
	if len(got) != len(want) {
		t.Fatalf("got %v, want %v", got, want)
	}
	for i := range want {
		if got[i] != want[i] {
			t.Errorf("line %d: %+v, want %+v", i, got[i], want[i])
		}
	}
	res.RR = &screen.RRResult{Beats: 5120, Hours: 1.5, Summary: rr.Summary{Segments: 40, AFLike: 12, MeanNRMSSD: 0.12, MeanEntropy: 0.71, MeanTPR: 0.66}}
	res.Baseline = &screen.BaselineUse{Status: "not_established", Weeks: 1}
	raw, _ = json.Marshal(res)
	got = metrics(raw)
	if len(got) != 4 || got[2] != (Metric{"beat intervals", "5120 beats over 1.5 h; 12 of 40 segments AF-like; mean normalised RMSSD 0.12, entropy 0.71, turning point ratio 0.66"}) ||
		got[3] != (Metric{"personal baseline", "not established (1 negative week)"}) {
		t.Errorf("with beats and a baseline: %+v", got)
	}
	if got := metrics([]byte(`{"irregular_share": 0.37}`)); len(got) != 1 || got[0] != (Metric{"irregular_share", "0.37"}) {
		t.Errorf("another shape: %+v", got)
	}
}
