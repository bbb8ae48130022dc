package screen

import (
	"bytes"
	"encoding/json"
	"math"
	"testing"

	"cohortdesk/cohort"
)

// Revision 1 counts the time the readings cover. The week of
// TestGapsAndTooFew: window 0 has readings from 0 s to 90 s (90 s covered);
// windows 1 and 2 are unusable; window 3 has readings from 0 s to 40 s and
// window 4 from 260 s to 299.999 s; the 520 s between them is above the
// 60 s gap limit, so no join. 90 + 40 + 39.999 = 169.999 s (hand-worked).
func TestCoveredWear(t *testing.T) {
	p := oneRule()
	p.Revision = 1
	p.MinWearHours = 0.01
	w := gapsWeek()
	res := mustScreen(t, &w, p, nil)
	got := res.Windows[0]
	if got.Usable != 3 {
		t.Fatalf("usable %d, want 3", got.Usable)
	}
	if want := 169.999 / 3600; math.Abs(got.UsableHours-want) > 1e-12 || res.WearHours != got.UsableHours {
		t.Errorf("covered hours %v (wear %v), want %v", got.UsableHours, res.WearHours, want)
	}

	// Adjacent usable windows join when the gap across their boundary is
	// within the limit: readings every 10 s over one hour cover the hour
	// from the first reading to the last, 3590 s (hand-worked).
	w = patternWeek(t, 0, "rrrrrrrrrrrr")
	res = mustScreen(t, &w, p, nil)
	if want := 3590.0 / 3600; math.Abs(res.Windows[0].UsableHours-want) > 1e-12 {
		t.Errorf("continuous hour: covered %v h, want %v", res.Windows[0].UsableHours, want)
	}
}

// The finding behind revision 1: 30-minute windows whose readings cover
// part of them. Readings at minutes 0, 7 and 14 of each window (3 readings,
// gaps of 7 min, within the 15-minute limit), then 16 minutes of silence to
// the next window (above the limit, so no join). 56 such windows are 28.0 h
// of whole windows, enough for the 24 h minimum, but the readings cover
// 56 x 14 min = 13.07 h (hand-worked).
func TestCoveredWearDecidesSufficiency(t *testing.T) {
	p := DefaultProtocol()
	p.Windows = p.Windows[1:] // the 30-minute rule alone
	p.RR.Enabled = false
	w := emptyWeek()
	for wi := int64(0); wi < 56; wi++ {
		ws := w.Start + wi*30*minuteMs
		for _, m := range []int64{0, 7, 14} {
			w.HR.Append(ws+m*minuteMs, 70+int32(m%2))
		}
	}
	p.Revision = 0
	old := mustScreen(t, &w, p, nil)
	if old.WearHours != 28 || old.Verdict != Negative {
		t.Errorf("revision 0: wear %v h, verdict %s; want 28 h of whole windows, negative", old.WearHours, old.Verdict)
	}
	p.Revision = 1
	cur := mustScreen(t, &w, p, nil)
	if want := 56 * 14.0 / 60; math.Abs(cur.WearHours-want) > 1e-12 || cur.Verdict != Insufficient {
		t.Errorf("revision 1: wear %v h, verdict %s; want %v h covered, insufficient", cur.WearHours, cur.Verdict, want)
	}
}

// A stored result keeps its numbers: a protocol version stored before
// revisions existed (JSON without "revision") reads as revision 0 and
// recomputes its stored result byte for byte, although the current
// revision would give another wear and verdict for the same readings.
func TestStoredResultRecomputesUnderItsRevision(t *testing.T) {
	p := DefaultProtocol()
	p.Windows = p.Windows[1:]
	p.RR.Enabled = false
	p.Revision = 0
	raw, err := json.Marshal(p)
	if err != nil {
		t.Fatal(err)
	}
	// What a version stored before this change holds: no revision field.
	var m map[string]any
	if err := json.Unmarshal(raw, &m); err != nil {
		t.Fatal(err)
	}
	delete(m, "revision")
	stored, _ := json.Marshal(m)

	w := emptyWeek()
	for wi := int64(0); wi < 56; wi++ {
		ws := w.Start + wi*30*minuteMs
		for _, mi := range []int64{0, 7, 14} {
			w.HR.Append(ws+mi*minuteMs, 70+int32(mi%2))
		}
	}
	first := mustScreen(t, &w, p, nil)
	storedResult, _ := json.Marshal(first)

	var again Protocol
	if err := json.Unmarshal(stored, &again); err != nil {
		t.Fatal(err)
	}
	if again.Revision != 0 {
		t.Fatalf("a version stored without a revision reads as revision %d, want 0", again.Revision)
	}
	recomputed, _ := json.Marshal(mustScreen(t, &w, again, nil))
	if !bytes.Equal(recomputed, storedResult) {
		t.Errorf("recomputed result differs from the stored one:\n%s\n%s", recomputed, storedResult)
	}
	again.Revision = CurrentRevision
	if cur, _ := json.Marshal(mustScreen(t, &w, again, nil)); bytes.Equal(cur, storedResult) {
		t.Errorf("the current revision gives the same result; the test week does not tell the rules apart")
	}
}

// The RR segments are scored with the revision's binning, and a week
// prepared under one revision is not re-evaluated under another.
func TestRevisionReachesTheRRMethod(t *testing.T) {
	p := DefaultProtocol()
	if !p.RRParams().ExactBins {
		t.Errorf("revision %d: RRParams bins in floating point, want exact", p.Revision)
	}
	p.Revision = 0
	if p.RRParams().ExactBins {
		t.Errorf("revision 0: RRParams bins exactly, want the first rule")
	}
	w := cohort.Week{Week: 1, Start: testStart, End: testStart + weekMs}
	pr := Prepare(&w, p)
	p.Revision = 1
	if _, err := Evaluate(pr, p, nil); err == nil {
		t.Errorf("a week prepared under revision 0 was evaluated under revision 1")
	}
	p.Revision = 2
	if err := p.Validate(); err == nil {
		t.Errorf("revision 2 validated; only 0..%d exist", CurrentRevision)
	}
}
