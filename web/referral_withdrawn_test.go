package web

import (
	"context"
	"fmt"
	"net/http"
	"net/url"
	"strings"
	"testing"

	"cohortdesk/cohort"
)

// TestReferralOfWithdrawnParticipantWarns: once a participant has withdrawn,
// the summary preview says so, with what the issuer can still do; issuing
// without ticking the confirmation is refused beside the box and records
// nothing; with it the summary is issued and the audit event says the
// withdrawal was confirmed.
func TestReferralOfWithdrawnParticipantWarns(t *testing.T) {
	a := newApp(t)
	_, _, pids, cases := demoCanaries(t, a)
	var sid string
	for k := range pids {
		sid = k
		break
	}
	pid, caseID := pids[sid], cases[sid]
	ctx := context.Background()
	p, err := a.store.Participant(ctx, pid)
	if err != nil {
		t.Fatal(err)
	}
	coord := a.signIn(cohort.Coordinator)
	preview := fmt.Sprintf("/participants/%d/referral?case=%d", pid, caseID)
	if _, page := a.get(coord, preview); strings.Contains(page, `data-testid="withdrawn-warning"`) {
		t.Fatal("an enrolled participant's preview warns of a withdrawal")
	}
	on := cohort.DateOf(referralClock).AddDays(-3)
	if res := a.postForm(coord, fmt.Sprintf("/participants/%d/withdraw", pid), url.Values{"version": {fmt.Sprint(p.Version)},
		"withdrawn_on": {on.String()}, "reason": {"moved abroad"}}); res.StatusCode != http.StatusSeeOther {
		t.Fatalf("withdraw: status %d", res.StatusCode)
	}
	_, page := a.get(coord, preview)
	day := fmt.Sprintf("study day %d", on.DaysSince(p.EnrolledOn))
	for _, want := range []string{`data-testid="withdrawn-warning"`, "withdrew from the study on " + day, "What you can still do", `name="confirm_withdrawn"`} {
		if !strings.Contains(page, want) {
			t.Errorf("the withdrawn participant's preview lacks %q", want)
		}
	}
	count := func() (n int) {
		a.store.Pool().QueryRow(ctx, `SELECT count(*) FROM referrals WHERE participant_id = $1`, pid).Scan(&n)
		return n
	}
	before := count()
	path := fmt.Sprintf("/participants/%d/referral", pid)
	res, b := a.post(coord, path, url.Values{"case": {fmt.Sprint(caseID)}, "format": {"html"}, "paper": {paperA4}})
	if res.StatusCode != http.StatusUnprocessableEntity || !strings.Contains(string(b), `data-testid="error-confirm_withdrawn"`) ||
		!strings.Contains(string(b), `data-testid="withdrawn-warning"`) {
		t.Fatalf("unconfirmed issue for a withdrawn participant: status %d", res.StatusCode)
	}
	if count() != before {
		t.Fatal("the refused issue recorded a summary")
	}
	res, _ = a.post(coord, path, url.Values{"case": {fmt.Sprint(caseID)}, "format": {"html"}, "paper": {paperA4}, "confirm_withdrawn": {"yes"}})
	if res.StatusCode != http.StatusSeeOther || count() != before+1 {
		t.Fatalf("confirmed issue: status %d, %d summaries", res.StatusCode, count()-before)
	}
	var confirmed bool
	a.store.Pool().QueryRow(ctx, `SELECT (new_value->>'withdrawn_confirmed')::boolean FROM audit_events WHERE action = 'referral.issue' ORDER BY id DESC LIMIT 1`).Scan(&confirmed)
	if !confirmed {
		t.Error("the audit event of the confirmed issue does not record the confirmation")
	}
}
