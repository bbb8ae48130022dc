package web

import (
	"context"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort/followup"
	"cohortdesk/cohort/overread"
	"cohortdesk/web/browsertest"

	"github.com/chromedp/chromedp"
)

// TestBrowserRecordingToStatistics drives headless Chromium: a coordinator
// uploads an EDF+ file through the case page's form (with the upload
// script), the strip is drawn at true scale (1 mm = 96/25.4 CSS px, the CSS
// definition of the millimetre), an investigator enters the over-read, and
// the statistics page draws its charts.
func TestBrowserRecordingToStatistics(t *testing.T) {
	a := newApp(t)
	ids := shippedCases(t, a, 1)
	file := filepath.Join(t.TempDir(), "strip.edf")
	if err := os.WriteFile(file, edfFile(t, synthWave(t, 32, 250)), 0o644); err != nil {
		t.Fatal(err)
	}
	b := browsertest.Start(t, 90*time.Second)
	base := a.ts.URL
	browserSignIn(b, base, "coordinator@example.org")
	b.Do("upload the recording",
		chromedp.Navigate(fmt.Sprintf("%s/cases/%d", base, ids[0])),
		chromedp.WaitVisible(chromedp.CSS(`[data-testid="form-recording"]`)),
		chromedp.SetUploadFiles(chromedp.ID("waveform"), []string{file}),
		chromedp.SetValue(chromedp.ID("auto"), string(overread.AutoSuggestsRegular)),
		chromedp.SetValue(chromedp.ID("taken_at"), time.Now().UTC().Format("2006-01-02T15:04")),
		chromedp.Click(chromedp.CSS(`[data-testid="add-recording"]`)),
		chromedp.WaitVisible(chromedp.CSS(`figure.strip svg`)),
	)
	if msg := b.Text("flash", `[data-testid="recording-flash"]`); msg != "Recording stored." {
		t.Fatalf("flash %q", msg)
	}
	widthPx, err := chromedp.Run(b.Context(), chromedp.Evaluate[float64](`document.querySelector('figure.strip svg').getBoundingClientRect().width`))
	if err != nil {
		t.Fatal(err)
	}
	widthAttr, err := chromedp.Run(b.Context(), chromedp.Evaluate[string](`document.querySelector('figure.strip svg').getAttribute('width')`))
	if err != nil {
		t.Fatal(err)
	}
	var mm float64
	fmt.Sscanf(strings.TrimSuffix(widthAttr, "mm"), "%g", &mm)
	if mm < 250 || math.Abs(widthPx-mm*96/25.4) > 1 {
		t.Errorf("strip %q drawn %.1f px wide, want %.1f px", widthAttr, widthPx, mm*96/25.4)
	}
	b.Screenshot("recording-page")

	b.Do("sign out", chromedp.Click(chromedp.CSS(`[data-testid="sign-out"]`)), chromedp.WaitVisible(chromedp.ID("email")))
	browserSignIn(b, base, "investigator@example.org")
	b.Do("enter the over-read",
		chromedp.Navigate(base+"/confirmations"),
		chromedp.WaitVisible(chromedp.CSS(`[data-testid="unread-table"] a`)),
		chromedp.Click(chromedp.CSS(`[data-testid="unread-table"] a`)),
		chromedp.WaitVisible(chromedp.CSS(`[data-testid="form-over-read"]`)),
		chromedp.Click(chromedp.CSS(`input[name="rhythm"][value="sinus"]`)),
		chromedp.SetValue(chromedp.ID("confidence"), "certain"),
		chromedp.Click(chromedp.CSS(`[data-testid="enter-over-read"]`)),
		chromedp.WaitVisible(chromedp.CSS(`[data-testid="readings"]`)),
	)
	if v := b.Text("verdict", `[data-testid="recording-verdict"]`); v != "sinus rhythm" {
		t.Errorf("verdict %q", v)
	}
	if c, _ := a.store.Case(context.Background(), ids[0]); c.State != followup.OverRead {
		t.Errorf("case in %s", c.State)
	}
	b.Do("statistics",
		chromedp.Navigate(base+"/confirmations/statistics"),
		chromedp.WaitVisible(chromedp.CSS(`[data-testid="chart-km"][data-drawn]`)),
		chromedp.WaitVisible(chromedp.CSS(`[data-testid="chart-ppv"][data-drawn] svg`)),
	)
	b.Screenshot("statistics")
}
