package web

import (
	"context"
	"fmt"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/ecg"
	"cohortdesk/cohort/overread"
	"cohortdesk/db"

	"github.com/chromedp/chromedp"
	"github.com/chromedp/chromedp/kb"
)

// focused describes the element that has the focus: its id, its tag, the
// data-testid of its row, and whether it is the row's own link.
const focused = `(() => { const e = document.activeElement; const r = e.closest('[data-row]');
	return [e.id, e.tagName.toLowerCase(), r ? r.id || r.getAttribute('data-testid') || 'row' : '', e.hasAttribute('data-row-focus')].join('|'); })()`

// shownKeys is what the page's key line shows now, one key's text a line.
const shownKeys = `Array.from(document.querySelectorAll('p.keys .key')).filter(k => !k.hidden && k.offsetParent).map(k => k.innerText.trim()).join('\n')`

// TestBrowserKeys works the pages with the key scheme alone, in headless
// Chromium: the number on a tab opens its area; on triage l goes to the
// first row, the arrows move between rows, c puts the focus on the row's
// contact channel and Esc brings it back to the row, t takes the case and
// Enter opens it; on the case page c goes to the contact attempt form; on
// the case list l and x tick a row; on the participant list f goes to the
// search and + opens the enrolment form; an investigator's r goes to the
// rhythm of the over-read. The key line of each page shows the keys of the
// reader's role only, and an empty list's keys are left out of it.
func TestBrowserKeys(t *testing.T) {
	a := newApp(t)
	ids := seedFollowUp(t, a.store, 4)
	ctx := context.Background()
	coord := a.users[cohort.Coordinator].Actor("127.0.0.1", "test")
	c, err := a.store.LogAttempt(ctx, coord, ids[3], db.AttemptInput{Version: caseVersion(t, a, ids[3]), Channel: "phone", Outcome: "reached"})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := a.store.RecordShipment(ctx, coord, ids[3], c.Version, cohort.DateOf(time.Now().UTC()), ""); err != nil {
		t.Fatal(err)
	}
	rec, err := a.store.AddRecording(ctx, coord, ids[3], ecg.RecordingInput{TakenAt: time.Now(), DurationS: 45, Auto: overread.AutoSuggestsAF})
	if err != nil {
		t.Fatal(err)
	}
	tb := newTab(t, a, 150*time.Second)
	at := func() string { return tb.eval(focused) }
	press := func(what, key string) {
		t.Helper()
		tb.b.Do(what, chromedp.KeyEvent(key))
	}
	tb.signIn(cohort.Coordinator)

	// Areas: the number printed on the tab opens it.
	if got := tb.b.Text("triage tab", `[data-testid="nav-triage"] kbd`); got != "2" {
		t.Fatalf("the triage tab prints %q, want 2", got)
	}
	tb.b.Do("2 opens triage", chromedp.KeyEvent("2"), chromedp.WaitVisible(chromedp.CSS(`[data-testid="group-new"]`)))
	if !strings.HasSuffix(tb.b.Location(), "/triage") {
		t.Fatalf("2 leads to %s, want triage", tb.b.Location())
	}
	keys := tb.eval(shownKeys)
	for _, want := range []string{"l to the list", "t take the case", "c log a contact attempt"} {
		if !strings.Contains(keys, want) {
			t.Errorf("triage's key line for a coordinator lacks %q:\n%s", want, keys)
		}
	}

	// The list: l, the arrows, c and Esc, t, Enter.
	first := tb.eval(`document.querySelector('[data-row]').id`)
	second := tb.eval(`document.querySelectorAll('[data-row]')[1].id`)
	press("l", "l")
	if got := at(); !strings.HasPrefix(got, "|a|"+first+"|true") {
		t.Fatalf("l puts the focus on %q, want the link of row %s", got, first)
	}
	press("down", kb.ArrowDown)
	if got := at(); !strings.Contains(got, "|"+second+"|") {
		t.Fatalf("↓ puts the focus on %q, want row %s", got, second)
	}
	press("up", kb.ArrowUp)
	if got := at(); !strings.Contains(got, "|"+first+"|") {
		t.Fatalf("↑ puts the focus on %q, want row %s", got, first)
	}
	id := strings.TrimPrefix(first, "case-")
	press("c", "c")
	if got := at(); !strings.HasPrefix(got, "channel-"+id+"|select|") {
		t.Fatalf("c puts the focus on %q, want the contact channel of %s", got, first)
	}
	press("Esc", kb.Escape)
	if got := at(); !strings.HasPrefix(got, "|a|"+first+"|true") {
		t.Fatalf("Esc leaves the focus on %q, want the row's link", got)
	}
	tb.b.Do("t takes the case", chromedp.KeyEvent("t"), chromedp.WaitVisible(chromedp.CSS("#"+first+` [data-testid="row-done"]`)))
	if got := tb.b.Text("owner", "#"+first+` [data-testid="row-owner"]`); got != "Test Coordinator" {
		t.Errorf("owner after t: %q", got)
	}
	press("l", "l")
	tb.b.Do("Enter opens the case", chromedp.KeyEvent(kb.Enter), chromedp.WaitVisible(chromedp.CSS(`[data-testid="case-timeline"]`)))
	if !strings.Contains(tb.b.Location(), "/cases/") {
		t.Fatalf("Enter on the row opens %s, want a case page", tb.b.Location())
	}

	// The case page: c goes to the contact attempt form's first field.
	press("c", "c")
	if got := at(); !strings.HasPrefix(got, "channel|select|") {
		t.Errorf("c on the case page puts the focus on %q, want the attempt's channel", got)
	}
	press("Esc", kb.Escape)

	// The case list: l then x ticks the first row.
	tb.open("/cases", `[data-testid="cases-table"]`)
	press("l", "l")
	press("x", "x")
	if got := tb.eval(`document.querySelector('[data-row] input[type=checkbox]').checked`); got != "true" {
		t.Errorf("l then x leaves the first row unticked")
	}

	// The participant list: f, Esc, then + opens the enrolment form.
	tb.open("/participants", "#q")
	press("f", "f")
	if got := at(); !strings.HasPrefix(got, "q|input|") {
		t.Errorf("f puts the focus on %q, want the search", got)
	}
	press("Esc", kb.Escape)
	tb.b.Do("+ opens the enrolment form", chromedp.KeyEvent("+"), chromedp.WaitVisible(chromedp.CSS(`#enrolled_on`)))
	if !strings.HasSuffix(tb.b.Location(), "/participants/new") {
		t.Errorf("+ leads to %s, want the enrolment form", tb.b.Location())
	}

	// An empty list: its keys are left out of the line.
	tb.open("/imports", "main")
	if tb.has(`[data-row]`) {
		t.Fatal("the imports list is not empty; the check below needs an empty list")
	}
	if keys := tb.eval(shownKeys); strings.Contains(keys, "to the list") || !strings.Contains(keys, "+ new") {
		t.Errorf("the empty imports list's key line:\n%s", keys)
	}

	// An investigator: no contact or mailing keys; r reads the ECG.
	tb.signIn(cohort.Investigator)
	tb.open("/triage", "main")
	keys = tb.eval(shownKeys)
	if !strings.Contains(keys, "t take the case") || strings.Contains(keys, "contact attempt") || strings.Contains(keys, "recorder mailed") {
		t.Errorf("triage's key line for an investigator:\n%s", keys)
	}
	tb.open(fmt.Sprintf("/recordings/%d", rec.ID), `[data-testid="form-over-read"]`)
	press("r", "r")
	if got := tb.eval(`document.activeElement.name + '|' + document.activeElement.type`); got != "rhythm|radio" {
		t.Errorf("r puts the focus on %q, want the rhythm", got)
	}

	// A monitor: no step keys anywhere on the case list.
	tb.signIn(cohort.Monitor)
	tb.open("/cases", "main")
	if keys := tb.eval(shownKeys); strings.Contains(keys, "tick") || strings.Contains(keys, "take") {
		t.Errorf("the case list's key line for a monitor:\n%s", keys)
	}
}
