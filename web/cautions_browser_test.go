package web

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/web/browsertest"

	"github.com/chromedp/cdproto/page"
	"github.com/chromedp/chromedp"
)

// TestBrowserPrintsCautionsWithTheWeeklyReport prints the weekly report from
// headless Chromium and reads the PDF back with pdftotext: every caution is
// there in full, though on screen the component shows one line until opened,
// and so is the page footer. On screen the list starts closed: the check that
// the printout holds it is not a check of what the page always shows.
func TestBrowserPrintsCautionsWithTheWeeklyReport(t *testing.T) {
	a := newAppAt(t, time.Date(2026, 3, 11, 12, 0, 0, 0, time.UTC))
	cascadeCohort(t, a)
	b := browsertest.Start(t, 120*time.Second)
	browserSignIn(b, a.ts.URL, "investigator@example.org")
	b.Do("open the report",
		chromedp.Navigate(a.ts.URL+"/progress/report?paper=a4"),
		chromedp.WaitVisible(chromedp.CSS(`[data-testid="report-doc"] [data-cautions]`)),
	)
	shown := b.Text("cautions on screen", `[data-testid="report-doc"] [data-cautions]`)
	if strings.Contains(shown, cohort.Cautions[len(cohort.Cautions)-1]) {
		t.Errorf("on screen the cautions start open: %q", shown)
	}
	pdf, err := chromedp.Run(b.Context(), chromedp.PrintToPDF(func(p *page.PrintToPDFParams) {
		yes := true
		p.PreferCSSPageSize = &yes
		p.PrintBackground = &yes
	}))
	if err != nil {
		t.Fatalf("print: %v", err)
	}
	if os.Getenv("COHORTDESK_KEEP_PRINT") != "" {
		os.WriteFile(filepath.Join(os.TempDir(), "weekly-report-cautions.pdf"), pdf, 0o644)
	}
	text := pdfText(t, pdf)
	for _, c := range append([]string{cohort.CautionsHeading}, cohort.Cautions...) {
		if !containsWrapped(text, c) {
			t.Errorf("the printed report lacks the caution %q", c)
		}
	}
	if !containsWrapped(text, "it does not diagnose") {
		t.Error("the page footer does not print")
	}
}
