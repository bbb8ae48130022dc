package web

import (
	"context"
	"fmt"
	"strings"
	"sync"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/credential"
	"cohortdesk/db"
	"cohortdesk/web/browsertest"

	"github.com/chromedp/chromedp"
)

// TestBrowserFirstContactFromTriage drives headless Chromium: a coordinator
// sends a first-contact e-mail from the triage row in one step and sees it
// in the case timeline; a second coordinator, in a separate browser session,
// presses the same row's button at the same moment, and the message is
// written once: one of them is told the case changed under them.
func TestBrowserFirstContactFromTriage(t *testing.T) {
	a, cases := outreachApp(t, 2)
	ctx := context.Background()
	hash, err := credential.Hash(testPassword, credential.TestParams)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := a.store.CreateUser(ctx, cohort.System, db.NewUser{Email: "coordinator2@example.org", Name: "Second Coordinator", Role: cohort.Coordinator, PasswordHash: hash}); err != nil {
		t.Fatal(err)
	}
	b := browsertest.Start(t, 2*time.Minute)
	base := a.ts.URL
	row := fmt.Sprintf("#case-%d", cases[0])
	send := row + ` [data-testid="send"] button`

	// The second coordinator: a tab of the same browser with its own
	// cookies (a separate browser context), signed in as someone else.
	other, cancel := chromedp.NewContext(b.Context(), chromedp.WithNewBrowserContext())
	defer cancel()
	signIn := func(ctx context.Context, email string) error {
		return chromedp.Do(ctx,
			chromedp.Navigate(base+"/signin"),
			chromedp.WaitVisible(chromedp.ID("email")),
			chromedp.SendKeys(chromedp.ID("email"), email),
			chromedp.SendKeys(chromedp.ID("password"), testPassword),
			chromedp.Click(chromedp.CSS(`[data-testid="signin-submit"]`)),
			chromedp.WaitVisible(chromedp.CSS(`[data-testid="user-role"]`)),
			chromedp.Navigate(base+"/triage"),
			chromedp.WaitVisible(chromedp.CSS(send)),
		)
	}
	if err := signIn(b.Context(), "coordinator@example.org"); err != nil {
		t.Fatalf("first coordinator: %v", err)
	}
	if err := signIn(other, "coordinator2@example.org"); err != nil {
		t.Fatalf("second coordinator: %v", err)
	}
	if got := b.Text("button", send); got != "E-mail: first contact" {
		t.Fatalf("the row's one-step message reads %q", got)
	}

	// Both press the button at the same moment.
	// The answer is the whole board: the row shows what happened if the case
	// stays in its group, else a notice above the groups says it (a refusal
	// as an alert).
	answer := func(ctx context.Context) (string, error) {
		either := `document.querySelector('` + row + ` [data-testid="row-done"], ` + row + ` [data-testid="row-error"], [data-testid="board-notice"], [data-testid="board-refusal"]') !== null`
		if err := chromedp.Do(ctx, browsertest.HTMXSettled(), chromedp.Click(chromedp.CSS(send)),
			chromedp.Poll[chromedp.Void](either, chromedp.WithPollingTimeout(30*time.Second))); err != nil {
			return "", err
		}
		return chromedp.Run(ctx, chromedp.Evaluate[string](`(() => {
			const q = s => document.querySelector(s);
			if (q('[data-testid="board-notice"]')) return "done: " + q('[data-testid="board-notice"]').textContent;
			if (q('[data-testid="board-refusal"]')) return "refused: " + q('[data-testid="board-refusal"]').textContent;
			const cell = q('`+row+` .quick-actions').textContent;
			return (q('`+row+` [data-testid="row-done"]') ? "done: " : "refused: ") + cell;
		})()`))
	}
	var wg sync.WaitGroup
	var got [2]string
	var errs [2]error
	start := make(chan struct{})
	for i, c := range []context.Context{b.Context(), other} {
		wg.Go(func() {
			<-start
			got[i], errs[i] = answer(c)
		})
	}
	close(start)
	wg.Wait()
	for i, err := range errs {
		if err != nil {
			t.Fatalf("coordinator %d: %v", i+1, err)
		}
	}
	var dones, refusals int
	for _, g := range got {
		switch {
		case strings.HasPrefix(g, "done: ") && strings.Contains(g, "Message queued"):
			dones++
		case strings.HasPrefix(g, "refused: ") && strings.Contains(g, "logged a contact attempt"):
			refusals++
		}
	}
	if dones != 1 || refusals != 1 {
		t.Fatalf("the two answers: %q; want one sent and one told the case changed", got)
	}
	var n int
	if err := a.store.Pool().QueryRow(ctx, `SELECT count(*) FROM messages WHERE case_id = $1`, cases[0]).Scan(&n); err != nil || n != 1 {
		t.Fatalf("%d messages for the case (%v), want exactly 1", n, err)
	}

	// The first coordinator sees the message in the case timeline.
	b.Do("open the case", chromedp.Navigate(base+fmt.Sprintf("/cases/%d", cases[0])), chromedp.WaitVisible(chromedp.CSS(`[data-testid="case-timeline"]`)))
	tl := b.Text("timeline", `[data-testid="case-timeline"]`)
	for _, want := range []string{"E-mail queued: first contact (template v1)", "Contact attempt by e-mail: message left", "the message as written"} {
		if !strings.Contains(tl, want) {
			t.Errorf("the timeline lacks %q:\n%s", want, tl)
		}
	}
}
