package web

import (
	"bytes"
	"context"
	"fmt"
	"regexp"
	"strings"
	"testing"

	"cohortdesk/cohort/ecg"
	"cohortdesk/cohort/ecg/ecgtest"
	"cohortdesk/views/components"
)

// TestStripRendersAtTrueScale renders a synthetic 30 s strip and checks the
// paper: three 10 s rows, the SVG sized in millimetres at 25 mm/s (250 mm of
// trace per row plus the margin), the 1 mm and 5 mm grid, and one beat tick per
// detected beat (common practice; AHA/ACCF/HRS standardization
// recommendations, Kligfield et al. 2007, from memory).
func TestStripRendersAtTrueScale(t *testing.T) {
	rr := ecgtest.SinusRR(40, 800, 1)
	syn, err := ecg.Synthesize(rr, ecg.SynthOptions{RateHz: 250})
	w := syn.Waveform
	if err != nil {
		t.Fatal(err)
	}
	det, err := ecg.Detect(w)
	if err != nil {
		t.Fatal(err)
	}
	l := ecg.Layout(w, det.Beats, ecg.StripOptions{})
	var buf bytes.Buffer
	if err := components.ECGStrip(stripView("t", l, "test")).Render(context.Background(), &buf); err != nil {
		t.Fatal(err)
	}
	svg := buf.String()
	wantW := l.Options.MarginMM + 250
	if !strings.Contains(svg, fmt.Sprintf(`width="%.2fmm"`, wantW)) {
		t.Errorf("SVG width is not %.0f mm", wantW)
	}
	if got := strings.Count(svg, "–"); got != len(l.Rows) || len(l.Rows) != int((w.Seconds()+9.999)/10) {
		t.Errorf("%d row labels for %d rows of a %.1f s recording", got, len(l.Rows), w.Seconds())
	}
	if !strings.Contains(svg, `width="1" height="1"`) || !strings.Contains(svg, `width="5" height="5"`) {
		t.Error("grid squares are not 1 mm and 5 mm")
	}
	ticks := len(regexp.MustCompile(`v 2"`).FindAllString(svg, -1))
	if ticks != len(det.Beats) {
		t.Errorf("%d beat ticks for %d beats", ticks, len(det.Beats))
	}
}
