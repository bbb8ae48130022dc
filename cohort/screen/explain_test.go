package screen

import (
	"strings"
	"testing"
)

// TestExplainInPlainWords: the "why" of a week names what flagged it, or how
// far each criterion stayed from flagging it, with no "0 of 0" for a window
// size that measured nothing (said once instead). Figures are made up; the
// wording is ours.
func TestExplainInPlainWords(t *testing.T) {
	p := DefaultProtocol() // 5-minute windows: run 6, share 10%; 30-minute: run 3, share 10%; 3 AF-like segments
	empty := WindowResult{Minutes: 5}
	for _, tt := range []struct {
		name string
		res  Result
		want string
	}{
		{"flagged by a run and a share", Result{Verdict: Positive, WearHours: 102, Windows: []WindowResult{empty,
			{Minutes: 30, Usable: 204, Irregular: 27, LongestRun: 9, Share: 27.0 / 204, RunMet: true, ShareMet: true}}},
			"Flagged: 9 irregular 30-minute windows in a row (3 flag a week); 13% of the usable 30-minute windows irregular (10% flag a week). 102.0 hours of usable wear. No usable 5-minute window."},
		{"not flagged", Result{Verdict: Negative, WearHours: 117.5, Windows: []WindowResult{empty,
			{Minutes: 30, Usable: 235, Irregular: 2, LongestRun: 1, Share: 2.0 / 235}}},
			"Not flagged: at most 1 irregular 30-minute window in a row (3 would flag it); 1% of the usable 30-minute windows irregular (10% would flag it). 117.5 hours of usable wear. No usable 5-minute window."},
		{"nothing irregular", Result{Verdict: Negative, WearHours: 120, Windows: []WindowResult{empty, {Minutes: 30, Usable: 240}}},
			"Not flagged: no irregular 30-minute window (3 in a row would flag it). 120.0 hours of usable wear. No usable 5-minute window."},
		{"too little wear", Result{Verdict: Insufficient, WearHours: 10.24}, "Not enough wear to judge: 10.2 hours of usable wear, 24 needed."},
		{"by beat intervals", Result{Verdict: Positive, WearHours: 30, Windows: []WindowResult{empty, {Minutes: 30, Usable: 60}},
			RR: &RRResult{Met: true}}, ""},
	} {
		if tt.name == "by beat intervals" {
			tt.res.RR.Segments, tt.res.RR.AFLike = 12, 4
			tt.want = "Flagged: 4 of 12 beat segments AF-like (3 flag a week). 30.0 hours of usable wear. No usable 5-minute window."
		}
		got := Explain(tt.res, p)
		if got != tt.want {
			t.Errorf("%s:\n got %q\nwant %q", tt.name, got, tt.want)
		}
		if strings.Contains(got, "0 of 0") {
			t.Errorf("%s: %q", tt.name, got)
		}
	}
}
