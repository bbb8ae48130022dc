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
	"cohortdesk/web/browsertest"

	"github.com/chromedp/chromedp"
)

// TestBrowserTriageRowsToActFrom (issue 19, findings 3 and 4) works triage
// in headless Chromium, counting the coordinator's clicks: a taken case
// moves at once to "Your cases, coming due" and the counts follow, without
// a reload; the contact details open in the row (audited); a call is logged
// from the row; taking a colleague's case asks first. An investigator reads
// the ECG straight from the row of a case waiting for an over-read.
func TestBrowserTriageRowsToActFrom(t *testing.T) {
	a := newApp(t)
	ids := seedFollowUp(t, a.store, 4)
	ctx := context.Background()
	// ids[3] is the investigator's case, ids[2] waits for an over-read.
	a.exec(`UPDATE cases SET owner_id = $2, due_at = now() - interval '1 day' WHERE id = $1`, ids[3], a.users[cohort.Investigator].ID)
	coordActor := a.users[cohort.Coordinator].Actor("127.0.0.1", "test")
	c, err := a.store.LogAttempt(ctx, coordActor, ids[2], dbAttempt(caseVersion(t, a, ids[2])))
	if err != nil {
		t.Fatal(err)
	}
	if _, err := a.store.RecordShipment(ctx, coordActor, ids[2], c.Version, cohort.DateOf(time.Now().UTC()), ""); err != nil {
		t.Fatal(err)
	}
	w := synthWave(t, 32, 250)
	rec, err := a.store.AddRecording(ctx, coordActor, ids[2], ecg.RecordingInput{TakenAt: time.Now(), Auto: overread.AutoSuggestsAF, Samples: w.Samples, RateHz: w.RateHz})
	if err != nil {
		t.Fatal(err)
	}

	tb := newTab(t, a, 3*time.Minute)
	b := tb.b
	row := fmt.Sprintf("#case-%d", ids[0])
	tb.signIn(cohort.Coordinator)
	clicks := 0
	tb.follow("open triage", `[data-testid="nav-triage"]`, `[data-testid="group-new"] `+row)
	clicks++
	// A mark on the page itself: a reload would lose it.
	tb.eval(`window.stillHere = true`)
	count := func(key string) string { return b.Text(key, `[data-testid="count-`+key+`"] .num`) }
	newBefore, mineBefore := count("new"), count("mine")
	b.Do("take the flag", chromedp.Click(chromedp.CSS(row+` [data-testid="take"] button`)),
		chromedp.WaitVisible(chromedp.CSS(`[data-testid="group-mine"] `+row+` [data-testid="row-done"]`)))
	clicks++
	if got := clicks; got != 2 {
		t.Errorf("taking a flag took %d clicks", got)
	}
	t.Logf("take a flag: %d clicks", clicks)
	if newBefore != "2" || mineBefore != "0" || count("new") != "1" || count("mine") != "1" || tb.eval(`String(window.stillHere)`) != "true" {
		t.Errorf("counts after taking: new %s -> %s, yours %s -> %s; page kept: %s", newBefore, count("new"), mineBefore, count("mine"), tb.eval(`String(window.stillHere)`))
	}
	if tb.has(`[data-testid="group-new"] ` + row) {
		t.Error("the taken case is still listed among the new flags")
	}

	// Log an attempt from the row, the phone number at hand.
	clicks = 0
	b.Do("show the contact details", browsertest.HTMXSettled(), chromedp.Click(chromedp.CSS(row+` [data-testid="show-contact"]`)),
		chromedp.WaitVisible(chromedp.CSS(row+` [data-testid="contact-phone"]`)))
	clicks++
	if got := b.Text("phone", row+` [data-testid="contact-phone"]`); got != "555-0100" {
		t.Errorf("phone in the row %q", got)
	}
	var viewed int
	a.store.Pool().QueryRow(ctx, `SELECT count(*) FROM audit_events WHERE action = 'participant.view_phi' AND new_value->>'purpose' = 'triage row'`).Scan(&viewed)
	if viewed != 1 {
		t.Errorf("%d audited views of the contact details, want 1", viewed)
	}
	b.Do("log the call that reached the participant",
		browsertest.HTMXSettled(), chromedp.SetValue(chromedp.ID(fmt.Sprintf("outcome-%d", ids[0])), "reached"),
		chromedp.Click(chromedp.CSS(row+` [data-testid="attempt"] button`)),
		chromedp.WaitVisible(chromedp.CSS(`[data-testid="group-mine"] `+row+` [data-testid="ship"]`)))
	clicks += 2
	t.Logf("log an attempt: %d clicks", clicks)
	if clicks != 3 || tb.eval(`String(window.stillHere)`) != "true" {
		t.Errorf("logging an attempt took %d clicks, page kept %s", clicks, tb.eval(`String(window.stillHere)`))
	}

	// A colleague's case: "take it" asks first.
	other := fmt.Sprintf("#case-%d", ids[3])
	if !tb.has(other + ` [data-testid="take"] button[data-confirm]`) {
		t.Fatal("taking a colleague's case does not ask first")
	}
	b.Do("take the colleague's case", browsertest.HTMXSettled(), chromedp.Click(chromedp.CSS(other+` [data-testid="take"] button`)),
		chromedp.WaitVisible(chromedp.CSS(other+` [data-testid="row-done"]`)), browsertest.HTMXSettled())
	if got := tb.confirmed(); len(got) != 1 || !strings.Contains(got[0], "Test Investigator has taken this case on") {
		t.Errorf("questions asked %q", got)
	}
	tb.signOut()

	// The investigator reads the ECG from the row.
	tb.signIn(cohort.Investigator)
	rrow := fmt.Sprintf("#case-%d", ids[2])
	tb.follow("open triage", `[data-testid="nav-triage"]`, `[data-testid="group-overread"] `+rrow)
	if tb.has(rrow + ` [data-testid="attempt"]`) {
		t.Error("an investigator is offered to log an attempt")
	}
	tb.follow("read the ECG", rrow+` [data-testid="read-ecg"]`, `[data-testid="form-over-read"]`)
	if !strings.HasSuffix(b.Location(), fmt.Sprintf("/recordings/%d", rec.ID)) {
		t.Errorf("read the ECG opened %s", b.Location())
	}
}

// dbAttempt is a phone call that reached the participant, on the version
// of the case given.
func dbAttempt(version int) db.AttemptInput {
	return db.AttemptInput{Version: version, Channel: "phone", Outcome: "reached"}
}
