package web

import (
	"math"
	"os"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/web/browsertest"

	"github.com/chromedp/cdproto/page"
	"github.com/chromedp/chromedp"
)

// TestBrowserPrintsWeeklyReport prints the weekly report of cascadeCohort
// from headless Chromium on A4 (595 x 842 pt) and US Letter (612 x 792 pt;
// ISO 216 and ANSI paper sizes, common knowledge) and reads the PDF back
// with pdftotext: it holds the key numbers, the enrolment row, every box of
// the cascade with its count, the PPV and none of the application's
// navigation or forms.
func TestBrowserPrintsWeeklyReport(t *testing.T) {
	a := newAppAt(t, time.Date(2026, 3, 11, 12, 0, 0, 0, time.UTC))
	cascadeCohort(t, a)
	_, html := a.get(a.signIn(cohort.Investigator), "/progress/report")
	b := browsertest.Start(t, 120*time.Second)
	browserSignIn(b, a.ts.URL, "investigator@example.org")
	mediaBox := regexp.MustCompile(`/MediaBox\s*\[\s*0\s+0\s+([0-9.]+)\s+([0-9.]+)\s*\]`)
	for _, tt := range []struct {
		paper string
		w, h  float64
	}{{"a4", 595.28, 841.89}, {"letter", 612, 792}} {
		b.Do("open the report on "+tt.paper,
			chromedp.Navigate(a.ts.URL+"/progress/report?paper="+tt.paper),
			chromedp.WaitVisible(chromedp.CSS(`[data-testid="report-doc"]`)),
		)
		pdf, err := chromedp.Run(b.Context(), chromedp.PrintToPDF(func(p *page.PrintToPDFParams) {
			yes := true
			p.PreferCSSPageSize = &yes
			p.PrintBackground = &yes
		}))
		if err != nil {
			t.Fatalf("print %s: %v", tt.paper, err)
		}
		if os.Getenv("COHORTDESK_KEEP_PRINT") != "" {
			os.WriteFile(filepath.Join(os.TempDir(), "weekly-report-"+tt.paper+".pdf"), pdf, 0o644)
		}
		boxes := mediaBox.FindAllSubmatch(pdf, -1)
		if len(boxes) == 0 {
			t.Fatalf("%s: no page size in the printout", tt.paper)
		}
		for _, m := range boxes {
			w, _ := strconv.ParseFloat(string(m[1]), 64)
			h, _ := strconv.ParseFloat(string(m[2]), 64)
			if math.Abs(w-tt.w) > 1 || math.Abs(h-tt.h) > 1 {
				t.Errorf("%s: a page of %.2f x %.2f pt, want %.2f x %.2f", tt.paper, w, h, tt.w, tt.h)
			}
		}
		text := pdfText(t, pdf)
		// pdftotext ends each page with a form feed. The report flows from
		// page to page so no page is left half blank (the demo's report is
		// checked for that in TestWeeklyReportPrintFillsItsPages): the
		// cascade may run over a page break between its boxes, but every box
		// is printed whole, its name and its count on one page, and the
		// agreement figures follow the cascade.
		pages := strings.Split(text, "\f")
		if n := len(pages) - 1; n != len(boxes) {
			t.Errorf("%s: %d pages of text for %d pages", tt.paper, n, len(boxes))
		}
		holding := func(heading string) int {
			for i, p := range pages {
				if strings.Contains(p, heading) {
					return i
				}
			}
			return -1
		}
		cascadeAt, agreementAt := holding("Screening cascade"), holding("How well the flag predicts AF")
		if cascadeAt < 0 || agreementAt < cascadeAt {
			t.Fatalf("%s: the cascade is on page %d and the agreement figures on page %d; want both, the agreement after the cascade", tt.paper, cascadeAt+1, agreementAt+1)
		}
		// In the text's layout a box's lines sit beside its exits' lines, so
		// each line of a box is looked for on its own.
		label := regexp.MustCompile(`class="flow-label">([^<]+)<`)
		for _, id := range testIDs(html, "cascade-step-") {
			step := section(html, id)
			key := strings.TrimPrefix(id, "cascade-step-")
			name, count := label.FindStringSubmatch(step)[1], byTestID(step, "cascade-count-"+key)+" participant"
			whole := false
			for _, p := range pages[cascadeAt:] {
				whole = whole || containsWrapped(p, name) && containsWrapped(p, count)
			}
			if !whole {
				t.Errorf("%s: box %s (%q, %q) is not printed whole on a page of the cascade", tt.paper, key, name, count)
			}
		}
		wants := []string{
			"Weekly progress report",
			"2/3 = 66.7%", // PPV: P1 and P2 confirmed of P1..P3 over-read
			"not confirmed: sinus rhythm",
			byTestID(section(html, "enrolment-all"), "projection"),
		}
		// The key numbers exactly as the page shows them.
		for _, id := range testIDs(html, "key-") {
			wants = append(wants, byTestID(html, id))
		}
		for _, want := range wants {
			if want == "" || !containsWrapped(text, want) {
				t.Errorf("%s printout lacks %q", tt.paper, want)
			}
		}
		if strings.Contains(text, "Triage") || strings.Contains(text, "Download the numbers") || strings.Contains(text, "Weeks of history for the projection") {
			t.Errorf("%s printout shows the navigation or the form", tt.paper)
		}
	}
}
