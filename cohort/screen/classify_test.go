package screen

import "testing"

// TestClassifyAgreesWithEvaluate checks that classifying every window of a
// week one by one gives the counts Evaluate reports for it, so charts that mark
// windows never disagree with the stored result.
func TestClassifyAgreesWithEvaluate(t *testing.T) {
	for _, s := range []synth{
		{seed: 7, rhythm: sinus, cadenceMs: 20_000, walks: 3},
		{seed: 8, rhythm: afLike, cadenceMs: 45_000, walks: 5, wearHours: 60},
	} {
		w := synthWeek(t, s)
		p := DefaultProtocol()
		p.RR.Enabled = false
		cleaned, _ := Clean(&w, p, testNow)
		pr := Prepare(&cleaned, p)
		res, err := Evaluate(pr, p, nil)
		if err != nil {
			t.Fatal(err)
		}
		for i, rule := range p.Windows {
			var got [6]int
			for _, sum := range pr.Summaries(i) {
				got[rule.Classify(sum, res.Windows[i].Threshold)]++
			}
			wr := res.Windows[i]
			want := [6]int{wr.Empty, wr.TooFew, wr.Gappy, wr.Active, wr.Usable - wr.Irregular, wr.Irregular}
			if got != want {
				t.Errorf("seed %d, %d-minute windows: classes %v, result counts %v", s.seed, rule.Minutes, got, want)
			}
			if s.rhythm == afLike && wr.Irregular == 0 || wr.Usable == 0 {
				t.Errorf("seed %d, %d-minute windows: %d usable, %d irregular; the test needs both kinds", s.seed, rule.Minutes, wr.Usable, wr.Irregular)
			}
		}
	}
}
