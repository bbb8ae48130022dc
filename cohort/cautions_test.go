package cohort

import (
	"strings"
	"testing"
)

// TestCautionsCoverTheSixPoints: the cautions say each of the six things a
// screening tool must say (screening is not diagnosis; a negative week does
// not rule out AF; not for emergencies; 30 s of ECG for a diagnosis;
// illustrative thresholds; licensed clinicians decide), and the text file
// carries every one of them.
func TestCautionsCoverTheSixPoints(t *testing.T) {
	all := strings.ToLower(strings.Join(Cautions, " "))
	for _, want := range []string{"not diagnosis", "negative week does not rule out atrial fibrillation", "emergenc",
		"30 seconds", "illustrative", "licensed clinicians"} {
		if !strings.Contains(all, want) {
			t.Errorf("the cautions do not say %q", want)
		}
	}
	text := CautionsText()
	for _, c := range Cautions {
		if !strings.Contains(text, c) {
			t.Errorf("the cautions file lacks %q", c)
		}
	}
	if !strings.HasPrefix(text, CautionsHeading) {
		t.Errorf("the cautions file starts %q", text[:20])
	}
}
