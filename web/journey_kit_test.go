package web

import (
	"context"
	"encoding/json"
	"sync"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/web/browsertest"

	"github.com/chromedp/cdproto/cdp"
	"github.com/chromedp/cdproto/page"
	"github.com/chromedp/chromedp"
)

// tab is one headless browser tab on the test app, with the steps the
// journey and accessibility tests share: signing in as a role, opening a
// page, reading what it shows.
type tab struct {
	t    *testing.T
	b    *browsertest.Browser
	base string

	mu      sync.Mutex
	dialogs []string // texts of the confirmation dialogs accepted so far
}

// newTab starts one browser for the whole test (its start-up is the
// expensive part) and accepts the confirmation dialogs of consequential
// buttons (data-confirm), keeping their texts so a test can check that the
// question was asked.
func newTab(t *testing.T, a *app, timeout time.Duration) *tab {
	t.Helper()
	tb := &tab{t: t, b: browsertest.Start(t, timeout), base: a.ts.URL}
	ctx := tb.b.Context()
	err := chromedp.Listen(ctx, func(ev any) {
		d, ok := ev.(*page.EventJavascriptDialogOpening)
		if !ok {
			return
		}
		tb.mu.Lock()
		tb.dialogs = append(tb.dialogs, d.Message)
		tb.mu.Unlock()
		// The click that opened the dialog waits for it to close, so the
		// answer goes from another goroutine (a listener must not call the
		// browser itself).
		go chromedp.Run(ctx, chromedp.Func(func(ctx context.Context, t *chromedp.Target) error {
			_, err := cdp.Call(ctx, t, page.HandleJavaScriptDialog, page.HandleJavaScriptDialogParams{Accept: true})
			return err
		}))
	})
	if err != nil {
		t.Fatalf("listen for dialogs: %v", err)
	}
	return tb
}

// confirmed lists the dialog texts accepted so far.
func (tb *tab) confirmed() []string {
	tb.mu.Lock()
	defer tb.mu.Unlock()
	return append([]string(nil), tb.dialogs...)
}

// signIn signs in through the form as the test account of role, signing
// whoever is signed in out first.
func (tb *tab) signIn(role cohort.Role) {
	tb.t.Helper()
	tb.b.Do("open sign-in", chromedp.Navigate(tb.base+"/signin"), chromedp.WaitReady(chromedp.CSS("body")))
	if tb.has(`[data-testid="sign-out"]`) {
		tb.signOut()
	}
	tb.b.Do("fill in the sign-in form as "+string(role),
		chromedp.WaitVisible(chromedp.ID("email")),
		chromedp.SendKeys(chromedp.ID("email"), string(role)+"@example.org"),
		chromedp.SendKeys(chromedp.ID("password"), testPassword),
	)
	tb.follow("sign in as "+string(role), `[data-testid="signin-submit"]`, `[data-testid="user-role"]`)
}

// signOut presses the header's sign-out button and waits for the sign-in
// form.
func (tb *tab) signOut() {
	tb.t.Helper()
	tb.follow("sign out", `[data-testid="sign-out"]`, "#email")
}

// follow clicks the element click, which opens another page (a link, a
// form's button), waits for that page's load event and then for waitCSS to
// show. Waiting for the load first keeps the next step from reaching for
// an element of the page being left.
func (tb *tab) follow(what, click, waitCSS string) {
	tb.t.Helper()
	_, err := chromedp.Run(tb.b.Context(), chromedp.WaitEvent(page.LoadEventFired, nil, chromedp.Click(chromedp.CSS(click))))
	if err != nil {
		shot := tb.b.Screenshot(what)
		tb.t.Fatalf("browser: %s: %v (screenshot: %s)", what, err, shot)
	}
	tb.b.Do(what, chromedp.WaitVisible(chromedp.CSS(waitCSS)))
}

// open navigates to path and waits until the element css shows.
func (tb *tab) open(path, css string) {
	tb.t.Helper()
	tb.b.Do("open "+path, chromedp.Navigate(tb.base+path), chromedp.WaitVisible(chromedp.CSS(css)))
}

// has reports whether an element matches css now, without waiting.
func (tb *tab) has(css string) bool {
	tb.t.Helper()
	return tb.eval(`document.querySelector(`+jsString(css)+`) !== null`) == "true"
}

// eval evaluates a JavaScript expression and returns its value as text.
func (tb *tab) eval(expr string) string {
	tb.t.Helper()
	v, err := chromedp.Run(tb.b.Context(), chromedp.Evaluate[any](expr))
	if err != nil {
		shot := tb.b.Screenshot("eval")
		tb.t.Fatalf("browser: evaluate %.80q: %v (screenshot: %s)", expr, err, shot)
	}
	switch x := v.(type) {
	case string:
		return x
	case bool:
		if x {
			return "true"
		}
		return "false"
	case nil:
		return ""
	default:
		b, _ := json.Marshal(x)
		return string(b)
	}
}

// visibleText is the page's rendered text (what a person reads, without
// markup, hidden elements or scripts).
func (tb *tab) visibleText() string {
	tb.t.Helper()
	return tb.eval(`document.body.innerText`)
}

// markup is the page's current DOM as HTML, attributes included.
func (tb *tab) markup() string {
	tb.t.Helper()
	return tb.eval(`document.documentElement.outerHTML`)
}

// status is the HTTP status of the page shown, as the browser received it
// (after redirects).
func (tb *tab) status() int {
	tb.t.Helper()
	var n int
	for _, c := range tb.eval(`String(performance.getEntriesByType('navigation')[0].responseStatus)`) {
		if c < '0' || c > '9' {
			return -1
		}
		n = n*10 + int(c-'0')
	}
	return n
}

// jsString quotes s as a JavaScript string literal.
func jsString(s string) string {
	b, _ := json.Marshal(s)
	return string(b)
}
