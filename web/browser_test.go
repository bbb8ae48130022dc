package web

import (
	"context"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort/deid"
	"cohortdesk/cohort/deid/deidtest"
	"cohortdesk/cohort/followup"
	"cohortdesk/views/components"
	"cohortdesk/web/browsertest"

	"github.com/chromedp/cdproto/page"
	"github.com/chromedp/chromedp"
)

// TestBrowserCoordinatorWorksACaseFromTriage drives headless Chromium: a
// coordinator signs in, opens triage, takes a new case, logs a phone call that
// reaches the participant and marks the recorder sent, each step updating the
// row in place; then the keyboard takes the next case.
func TestBrowserCoordinatorWorksACaseFromTriage(t *testing.T) {
	a := newApp(t)
	ids := seedFollowUp(t, a.store, 3)
	b := browsertest.Start(t, 90*time.Second)
	base := a.ts.URL
	row := fmt.Sprintf("#case-%d", ids[0])

	browserSignIn(b, base, "coordinator@example.org")
	b.Do("open triage", chromedp.Click(chromedp.CSS(`[data-testid="nav-triage"]`)), chromedp.WaitVisible(chromedp.CSS(row)))
	if got := b.Text("new count", `[data-testid="count-new"] .num`); got != "3" {
		t.Fatalf("new flags counted %q, want 3", got)
	}
	if !strings.Contains(b.Text("order rule", `[data-testid="order-rule"]`), "overdue cases first") {
		t.Fatal("the ordering rule is not shown")
	}

	b.Do("take the case",
		chromedp.Click(chromedp.CSS(row+` [data-testid="take"] button`)),
		chromedp.WaitVisible(chromedp.CSS(row+` [data-testid="row-done"]`)),
	)
	if got := b.Text("owner", row+` [data-testid="row-owner"]`); got != "Test Coordinator" {
		t.Fatalf("owner after taking the case %q", got)
	}
	if strings.Contains(b.Location(), "/cases/") {
		t.Fatal("the action left the triage page; htmx should have updated the row")
	}

	b.Do("log a call that reaches the participant",
		chromedp.SetValue(chromedp.ID(fmt.Sprintf("channel-%d", ids[0])), string(followup.ChannelPhone)),
		chromedp.SetValue(chromedp.ID(fmt.Sprintf("outcome-%d", ids[0])), string(followup.OutcomeReached)),
		chromedp.Click(chromedp.CSS(row+` [data-testid="attempt"] button`)),
		chromedp.WaitVisible(chromedp.CSS(row+` [data-testid="ship"]`)),
	)
	if got := b.Text("state after the call", row+` [data-testid="row-state"]`); got != "reached" {
		t.Fatalf("state after reaching %q", got)
	}
	if got := b.Text("next action", row+` [data-testid="row-next"]`); got != followup.ActionSendRecorder.Label() {
		t.Fatalf("next action %q", got)
	}

	// The call's answer is the board, swapped in by htmx: wait for it to
	// settle, so the typed tracking number reaches the field, not the page
	// (where digits open areas).
	b.Do("mark the recorder sent", browsertest.HTMXSettled(),
		chromedp.SendKeys(chromedp.ID(fmt.Sprintf("tracking-%d", ids[0])), "TRK-7781"),
		chromedp.Click(chromedp.CSS(row+` [data-testid="ship"] button`)),
		chromedp.WaitVisible(chromedp.CSS(`tr[data-state="recorder sent"]`+row)),
	)
	if got := b.Text("state after shipping", row+` [data-testid="row-state"]`); got != "recorder sent" {
		t.Fatalf("state after shipping %q", got)
	}

	b.Do("open the case page", chromedp.Click(chromedp.CSS(row+` a[data-row-focus]`)), chromedp.WaitVisible(chromedp.CSS(`[data-testid="case-timeline"]`)))
	if got := b.Text("tracking number", `[data-testid="case-tracking"]`); got != "TRK-7781" {
		t.Fatalf("tracking number on the case page %q", got)
	}
	if tl := b.Text("timeline", `[data-testid="case-timeline"]`); !strings.Contains(tl, "Contact attempt by phone: reached") || !strings.Contains(tl, "Recorded the recorder shipment") {
		t.Fatalf("timeline lacks the steps:\n%s", tl)
	}
	c, err := a.store.Case(context.Background(), ids[0])
	if err != nil || c.State != followup.RecorderSent || c.TrackingNumber != "TRK-7781" || c.Version != 4 {
		t.Fatalf("stored case %s %q v%d (%v)", c.State, c.TrackingNumber, c.Version, err)
	}

	// Keyboard only: l goes to the list's first row (the next new flag), t
	// takes it.
	next := fmt.Sprintf("#case-%d", ids[1])
	b.Do("keyboard: take the next case",
		chromedp.Navigate(base+"/triage"),
		chromedp.WaitVisible(chromedp.CSS(next)),
		chromedp.KeyEvent("l"),
		chromedp.KeyEvent("t"),
		chromedp.WaitVisible(chromedp.CSS(next+` [data-testid="row-done"]`)),
	)
	if got := b.Text("owner via keyboard", next+` [data-testid="row-owner"]`); got != "Test Coordinator" {
		t.Fatalf("owner after the keyboard action %q", got)
	}
}

// TestBrowserPrintsReferralOnChosenPaper prints the summary's print view
// from headless Chromium with the page size the CSS asks for: A4 is 595 x
// 842 pt and US Letter 612 x 792 pt (ISO 216 and ANSI paper sizes; common
// knowledge). The printout holds the referral code and the cautions, not
// the application's navigation, and none of the demo's canary identifiers.
func TestBrowserPrintsReferralOnChosenPaper(t *testing.T) {
	a := newApp(t)
	_, canaries, pids, cases := demoCanaries(t, a)
	var sid string
	for k := range pids {
		sid = k
		break
	}
	b := browsertest.Start(t, 90*time.Second)
	browserSignIn(b, a.ts.URL, "coordinator@example.org")
	mediaBox := regexp.MustCompile(`/MediaBox\s*\[\s*0\s+0\s+([0-9.]+)\s+([0-9.]+)\s*\]`)
	for _, tt := range []struct {
		paper string
		w, h  float64
	}{{"a4", 595.28, 841.89}, {"letter", 612, 792}} {
		b.Do("open the print view on "+tt.paper,
			chromedp.Navigate(fmt.Sprintf("%s/participants/%d/referral?case=%d&paper=%s", a.ts.URL, pids[sid], cases[sid], tt.paper)),
			chromedp.WaitVisible(chromedp.CSS(`[data-testid="referral-code"]`)),
		)
		pdf, err := chromedp.Run(b.Context(), chromedp.PrintToPDF(func(p *page.PrintToPDFParams) {
			yes := true
			p.PreferCSSPageSize = &yes
			p.PrintBackground = &yes
		}))
		if err != nil {
			t.Fatalf("print %s: %v", tt.paper, err)
		}
		m := mediaBox.FindSubmatch(pdf)
		if m == nil {
			t.Fatalf("%s: no page size in the printout", tt.paper)
		}
		w, _ := strconv.ParseFloat(string(m[1]), 64)
		h, _ := strconv.ParseFloat(string(m[2]), 64)
		if math.Abs(w-tt.w) > 1 || math.Abs(h-tt.h) > 1 {
			t.Errorf("%s printed on %.2f x %.2f pt, want %.2f x %.2f", tt.paper, w, h, tt.w, tt.h)
		}
		text := pdfText(t, pdf)
		if !strings.Contains(text, deid.Code([]byte(testSecret), sid)) || !containsWrapped(text, components.CautionItems[0]) || !containsWrapped(text, "Preview, not issued") {
			t.Errorf("%s printout lacks the code, the cautions or the preview mark", tt.paper)
		}
		if strings.Contains(text, "Triage") || strings.Contains(text, "Issue summary") {
			t.Errorf("%s printout shows the application's navigation or forms", tt.paper)
		}
		if leaks := deidtest.Leaks(text, canaries); len(leaks) > 0 {
			t.Errorf("%s printout leaks %v", tt.paper, leaks)
		}
		if os.Getenv("COHORTDESK_KEEP_PRINT") != "" {
			os.WriteFile(filepath.Join(os.TempDir(), "referral-print-"+tt.paper+".pdf"), pdf, 0o644)
		}
	}
}

// browserSignIn signs in through the form as the test account with this
// e-mail address and waits for the signed-in header.
func browserSignIn(b *browsertest.Browser, base, email string) {
	b.Do("sign in as "+email,
		chromedp.Navigate(base+"/signin"),
		chromedp.WaitVisible(chromedp.ID("email")),
		chromedp.SendKeys(chromedp.ID("email"), email),
		chromedp.SendKeys(chromedp.ID("password"), testPassword),
		chromedp.Click(chromedp.CSS(`[data-testid="signin-submit"]`)),
		chromedp.WaitVisible(chromedp.CSS(`[data-testid="user-role"]`)),
	)
}
