package web

import (
	"context"
	"fmt"
	"io"
	"net/http"
	"net/url"
	"strings"
	"testing"

	"cohortdesk/cohort"
	"cohortdesk/db"
)

// seedFollowUp adds a site, n participants (with made-up contact details), an
// active protocol with a positive week for each, and opens their cases. It
// returns the case ids in participant order.
func seedFollowUp(tb testing.TB, store *db.Store, n int) []int64 {
	tb.Helper()
	ctx := context.Background()
	pool := store.Pool()
	for _, sql := range []string{
		`INSERT INTO sites (code, name, time_zone) VALUES ('RV', 'Riverside clinic', 'UTC')`,
		`INSERT INTO participants (study_id, site_id, time_zone, enrolled_on)
		 SELECT 'RV-' || lpad(g::text, 4, '0'), 1, 'UTC', date '2026-01-05' FROM generate_series(1, $1) g`,
		`INSERT INTO participant_identity (participant_id, given_name, family_name, phone)
		 SELECT id, 'Wren' || id, 'Alderby', '555-0100' FROM participants`,
		`INSERT INTO protocols (name, version, params, active, used) VALUES ('weekly screen', 1, '{}', true, true)`,
		`INSERT INTO screen_results (participant_id, protocol_id, week, verdict, reason, result, input_digest, wear_hours)
		 SELECT id, 1, 3, 'positive', 'irregular windows above the limit', '{"irregular_share": 0.37}', 'digest', 98.5 FROM participants`,
	} {
		var err error
		if strings.Contains(sql, "$1") {
			_, err = pool.Exec(ctx, sql, n)
		} else {
			_, err = pool.Exec(ctx, sql)
		}
		if err != nil {
			tb.Fatalf("seed: %v", err)
		}
	}
	if _, _, err := store.SyncCases(ctx, cohort.System, 1, nil); err != nil {
		tb.Fatalf("sync: %v", err)
	}
	rows, err := pool.Query(ctx, `SELECT c.id FROM cases c JOIN participants p ON p.id = c.participant_id ORDER BY p.study_id`)
	if err != nil {
		tb.Fatal(err)
	}
	var ids []int64
	for rows.Next() {
		var id int64
		if err := rows.Scan(&id); err != nil {
			tb.Fatal(err)
		}
		ids = append(ids, id)
	}
	return ids
}

// hx posts a form the way htmx does.
func (a *app) hx(c *http.Client, path string, v url.Values) (*http.Response, string) {
	a.t.Helper()
	req, _ := http.NewRequest("POST", a.ts.URL+path, strings.NewReader(v.Encode()))
	req.Header.Set("Content-Type", "application/x-www-form-urlencoded")
	req.Header.Set("HX-Request", "true")
	res, err := c.Do(req)
	if err != nil {
		a.t.Fatal(err)
	}
	defer res.Body.Close()
	b, _ := io.ReadAll(res.Body)
	return res, string(b)
}

func caseVersion(t *testing.T, a *app, id int64) int {
	t.Helper()
	c, err := a.store.Case(context.Background(), id)
	if err != nil {
		t.Fatal(err)
	}
	return c.Version
}

func TestTriagePageGroupsCountsAndOrderRule(t *testing.T) {
	a := newApp(t)
	ids := seedFollowUp(t, a.store, 3)
	// One case overdue; the others are new flags nobody has taken on.
	a.exec(`UPDATE cases SET due_at = now() - interval '1 day' WHERE id = $1`, ids[2])
	res, body := a.get(a.signIn(cohort.Coordinator), "/triage")
	if res.StatusCode != 200 {
		t.Fatalf("status %d", res.StatusCode)
	}
	for _, want := range []string{
		`data-testid="order-rule"`, "How this list is ordered: overdue cases first",
		`data-testid="count-overdue"><a href="#group-overdue"><div class="num">1<`,
		`data-testid="count-new"><a href="#group-new"><div class="num">2<`,
		`data-testid="shortcuts"`, `data-row-key="t"`, `hx-target="#triage-board"`,
		fmt.Sprintf(`id="case-%d"`, ids[0]),
	} {
		if !strings.Contains(body, want) {
			t.Errorf("triage page lacks %s", want)
		}
	}
	overdue := strings.Index(body, fmt.Sprintf(`id="case-%d"`, ids[2]))
	if first := strings.Index(body, fmt.Sprintf(`id="case-%d"`, ids[0])); overdue < 0 || first < overdue {
		t.Error("the overdue case is not listed before the new flags")
	}
	if strings.Contains(body, "Wren") {
		t.Error("triage shows participant names")
	}
}

func TestIllegalMoveOverHTTPNamesAllowedStates(t *testing.T) {
	a := newApp(t)
	ids := seedFollowUp(t, a.store, 1)
	path := fmt.Sprintf("/cases/%d/move", ids[0])
	res, body := a.postFormBody(a.signIn(cohort.Coordinator), path, url.Values{"version": {"1"}, "state": {"over_read"}})
	if res.StatusCode != http.StatusUnprocessableEntity {
		t.Fatalf("status %d, want 422", res.StatusCode)
	}
	if !strings.Contains(body, "cannot move from open to over-read; allowed next states: contacting, reached, closed (unreachable), closed (declined), closed (withdrawn)") {
		t.Fatalf("message naming the allowed states missing:\n%s", body)
	}
	if v := caseVersion(t, a, ids[0]); v != 1 {
		t.Fatalf("refused move changed the case (version %d)", v)
	}
}

func TestSecondSaveFromAStaleCopyIsRefused(t *testing.T) {
	a := newApp(t)
	ids := seedFollowUp(t, a.store, 1)
	path := fmt.Sprintf("/cases/%d/assign", ids[0])
	coord, inv := a.signIn(cohort.Coordinator), a.signIn(cohort.Investigator)
	if res := a.postForm(coord, path, url.Values{"version": {"1"}, "owner": {"me"}}); res.StatusCode != http.StatusSeeOther {
		t.Fatalf("first save: status %d", res.StatusCode)
	}
	res, body := a.postFormBody(inv, path, url.Values{"version": {"1"}, "owner": {"me"}})
	if res.StatusCode != http.StatusConflict || !strings.Contains(body, "someone else changed this case after you opened it") ||
		!strings.Contains(body, "owner is now &#34;Test Coordinator&#34;") {
		t.Fatalf("stale save: status %d\n%s", res.StatusCode, body)
	}
	c, _ := a.store.Case(context.Background(), ids[0])
	if c.OwnerID != a.users[cohort.Coordinator].ID {
		t.Fatal("the stale save overwrote the first one")
	}
}

func TestTriageRowActionsWithHTMX(t *testing.T) {
	a := newApp(t)
	ids := seedFollowUp(t, a.store, 2)
	coord := a.signIn(cohort.Coordinator)
	id := ids[0]
	// Without htmx the form posts and comes back to the triage page.
	res := a.postForm(coord, fmt.Sprintf("/cases/%d/assign", id), url.Values{"version": {"1"}, "owner": {"me"}, "view": {"triage"}})
	if res.StatusCode != http.StatusSeeOther || res.Header.Get("Location") != fmt.Sprintf("/triage?done=assign#case-%d", id) {
		t.Fatalf("plain post: status %d location %q", res.StatusCode, res.Header.Get("Location"))
	}
	// With htmx the answer is the triage board: the row in its new group,
	// every group and count as they now are (issue 19, finding 3).
	res, body := a.hx(coord, fmt.Sprintf("/cases/%d/attempts", id), url.Values{"version": {"2"}, "view": {"triage"}, "channel": {"phone"}, "outcome": {"reached"}})
	if res.StatusCode != 200 || !strings.HasPrefix(strings.TrimSpace(body), `<div id="triage-board"`) || strings.Contains(body, "<html") ||
		!strings.Contains(section(body, "group-mine"), fmt.Sprintf(`<tr id="case-%d"`, id)) {
		t.Fatalf("htmx attempt: status %d\n%s", res.StatusCode, body)
	}
	for _, want := range []string{`data-state="reached"`, `data-testid="row-done"`, `data-testid="ship"`, "send the recorder"} {
		if !strings.Contains(body, want) {
			t.Errorf("row after reaching lacks %s", want)
		}
	}
	// A stale copy gets the current row with the reason, status 409.
	res, body = a.hx(coord, fmt.Sprintf("/cases/%d/shipment", id), url.Values{"version": {"2"}, "view": {"triage"}, "sent_on": {"2026-01-01"}})
	if res.StatusCode != http.StatusConflict || !strings.Contains(body, `data-testid="row-error"`) || !strings.Contains(body, `name="version" value="3"`) {
		t.Fatalf("stale htmx action: status %d\n%s", res.StatusCode, body)
	}
	// A refused input: 422 with the row and the message.
	res, body = a.hx(coord, fmt.Sprintf("/cases/%d/shipment", id), url.Values{"version": {"3"}, "view": {"triage"}, "sent_on": {"not a date"}})
	if res.StatusCode != http.StatusUnprocessableEntity || !strings.Contains(body, "enter the date as YYYY-MM-DD") {
		t.Fatalf("bad date: status %d\n%s", res.StatusCode, body)
	}
	// An unknown case is 404, also for htmx.
	if res, _ := a.hx(coord, "/cases/999999/assign", url.Values{"version": {"1"}, "view": {"triage"}}); res.StatusCode != http.StatusNotFound {
		t.Fatalf("unknown case: status %d", res.StatusCode)
	}
}

func TestCasePageShowsTimelineWeeksAndAuditsThePHIView(t *testing.T) {
	a := newApp(t)
	ids := seedFollowUp(t, a.store, 1)
	coord := a.signIn(cohort.Coordinator)
	path := fmt.Sprintf("/cases/%d", ids[0])
	a.postForm(coord, path+"/attempts", url.Values{"version": {"1"}, "channel": {"text_message"}, "outcome": {"no_answer"}, "note": {"will try after work hours"}})
	res, body := a.get(coord, path+"?done=attempt")
	if res.StatusCode != 200 {
		t.Fatalf("status %d", res.StatusCode)
	}
	for _, want := range []string{
		`data-testid="case-flash">Contact attempt logged.`, `data-testid="case-timeline"`, "Contact attempt by text message: no answer",
		"will try after work hours", "case moved to contacting", "Opened the case", `data-testid="flagged-weeks"`,
		"irregular_share", "irregular windows above the limit", "Wren", "555-0100", `data-testid="form-attempt"`,
	} {
		if !strings.Contains(body, want) {
			t.Errorf("case page lacks %s", want)
		}
	}
	var n int
	a.store.Pool().QueryRow(context.Background(), `SELECT count(*) FROM audit_events WHERE action = 'participant.view_phi' AND new_value->>'purpose' = 'case page'`).Scan(&n)
	if n != 1 {
		t.Fatalf("PHI views audited %d, want 1", n)
	}
	// Investigators see the case but not the contact actions.
	_, body = a.get(a.signIn(cohort.Investigator), path)
	if strings.Contains(body, `data-testid="form-attempt"`) || !strings.Contains(body, `data-testid="form-move"`) {
		t.Error("investigator: wrong actions offered")
	}
	if res := a.postForm(a.signIn(cohort.Investigator), path+"/attempts", url.Values{"version": {"2"}, "channel": {"phone"}, "outcome": {"reached"}}); res.StatusCode != http.StatusForbidden {
		t.Fatalf("investigator logging an attempt: status %d, want 403", res.StatusCode)
	}
	for _, p := range []string{"/cases/abc", "/cases/999999", "/cases/0"} {
		if res, _ := a.get(coord, p); res.StatusCode != http.StatusNotFound {
			t.Errorf("%s: status %d, want 404", p, res.StatusCode)
		}
	}
}

func TestMonitorSeesTheCaseListDeIdentified(t *testing.T) {
	a := newApp(t)
	ids := seedFollowUp(t, a.store, 2)
	coord := a.signIn(cohort.Coordinator)
	a.postForm(coord, fmt.Sprintf("/cases/%d/assign", ids[0]), url.Values{"version": {"1"}, "owner": {"me"}})
	a.postForm(coord, fmt.Sprintf("/cases/%d/note", ids[0]), url.Values{"version": {"2"}, "note": {"prefers mornings"}})
	_, body := a.get(coord, "/cases")
	for _, want := range []string{"prefers mornings", "Test Coordinator", fmt.Sprintf(`href="/cases/%d"`, ids[0]), `data-testid="bulk-actions"`} {
		if !strings.Contains(body, want) {
			t.Errorf("coordinator list lacks %s", want)
		}
	}
	mon := a.signIn(cohort.Monitor)
	res, body := a.get(mon, "/cases")
	if res.StatusCode != 200 || !strings.Contains(body, "RV-0001") || !strings.Contains(body, `data-testid="deidentified-note"`) {
		t.Fatalf("monitor list: status %d", res.StatusCode)
	}
	for _, leak := range []string{"prefers mornings", "Test Coordinator", "Wren", "2026-", `href="/cases/`, `data-testid="bulk-actions"`} {
		if strings.Contains(body, leak) {
			t.Errorf("monitor list shows %q", leak)
		}
	}
	if res, _ := a.get(mon, fmt.Sprintf("/cases/%d", ids[0])); res.StatusCode != http.StatusForbidden {
		t.Errorf("monitor case page: status %d, want 403", res.StatusCode)
	}
	if res, _ := a.get(mon, "/triage"); res.StatusCode != http.StatusForbidden {
		t.Errorf("monitor triage: status %d, want 403", res.StatusCode)
	}
}

func TestBulkAssignAndLettersOverHTTP(t *testing.T) {
	a := newApp(t)
	ids := seedFollowUp(t, a.store, 3)
	coord := a.signIn(cohort.Coordinator)
	sel := url.Values{"case": {fmt.Sprintf("%d:1", ids[0]), fmt.Sprintf("%d:1", ids[1])}, "bulk-owner": {"me"}, "back": {"/cases?site=1"}}
	res := a.postForm(coord, "/cases/bulk/assign", sel)
	if res.StatusCode != http.StatusSeeOther || res.Header.Get("Location") != "/cases?done=bulk&site=1" {
		t.Fatalf("bulk assign: status %d location %q", res.StatusCode, res.Header.Get("Location"))
	}
	// Stale versions now (both are at 2): nothing changes, the list says why.
	sel = url.Values{"case": {fmt.Sprintf("%d:2", ids[0]), fmt.Sprintf("%d:1", ids[1]), fmt.Sprintf("%d:1", ids[2])}, "back": {"/cases"}}
	res, body := a.postFormBody(coord, "/cases/bulk/letter", sel)
	if res.StatusCode != http.StatusConflict || !strings.Contains(body, `data-testid="bulk-error"`) || !strings.Contains(body, fmt.Sprintf("case %d", ids[1])) {
		t.Fatalf("stale bulk letter: status %d\n%s", res.StatusCode, body)
	}
	var letters int
	a.store.Pool().QueryRow(context.Background(), `SELECT count(*) FROM contact_attempts`).Scan(&letters)
	if letters != 0 {
		t.Fatalf("a refused bulk request logged %d letters", letters)
	}
	sel.Set("case", fmt.Sprintf("%d:2", ids[0]))
	sel.Add("case", fmt.Sprintf("%d:2", ids[1]))
	if res := a.postForm(coord, "/cases/bulk/letter", sel); res.StatusCode != http.StatusSeeOther {
		t.Fatalf("bulk letter: status %d", res.StatusCode)
	}
	a.store.Pool().QueryRow(context.Background(), `SELECT count(*) FROM contact_attempts WHERE channel = 'letter'`).Scan(&letters)
	if letters != 2 {
		t.Fatalf("letters logged %d, want 2", letters)
	}
	if res := a.postForm(a.signIn(cohort.Investigator), "/cases/bulk/letter", sel); res.StatusCode != http.StatusForbidden {
		t.Fatalf("investigator bulk letters: status %d, want 403", res.StatusCode)
	}
	if res, _ := a.postFormBody(coord, "/cases/bulk/assign", url.Values{"case": {"junk"}}); res.StatusCode != http.StatusUnprocessableEntity {
		t.Fatalf("malformed selection: status %d, want 422", res.StatusCode)
	}
}

func TestWithdrawalClosesTheParticipantsCases(t *testing.T) {
	a := newApp(t)
	ids := seedFollowUp(t, a.store, 1)
	c, _ := a.store.Case(context.Background(), ids[0])
	res := a.postForm(a.signIn(cohort.Coordinator), fmt.Sprintf("/participants/%d/withdraw", c.ParticipantID),
		url.Values{"withdrawn_on": {"2026-02-01"}, "reason": {"moved abroad"}, "version": {"1"}})
	if res.StatusCode != http.StatusSeeOther {
		t.Fatalf("withdraw: status %d", res.StatusCode)
	}
	c, _ = a.store.Case(context.Background(), ids[0])
	if c.State != "closed_withdrawn" || c.ClosedAt.IsZero() {
		t.Fatalf("case after withdrawal: %s", c.State)
	}
}

func TestStudySettingsPage(t *testing.T) {
	a := newApp(t)
	admin := a.signIn(cohort.Admin)
	res, body := a.get(admin, "/admin/study")
	if res.StatusCode != 200 || !strings.Contains(body, `name="max_attempts" type="number" min="0" value="5"`) {
		t.Fatalf("settings page: status %d", res.StatusCode)
	}
	if _, body := a.get(admin, "/admin"); !strings.Contains(body, `href="/admin/study"`) {
		t.Error("the administration page does not link the study settings")
	}
	form := url.Values{"name": {"Rhythm follow-up study"}, "time_zone": {"Nowhere/City"}, "enrolment_target": {"1200"},
		"first_contact_working_days": {"2"}, "max_attempts": {"5"}, "give_up_after_days": {"14"}, "recorder_send_within_days": {"5"},
		"recording_back_within_days": {"14"}, "over_read_within_days": {"x"}, "refer_or_close_within_days": {"3"},
		"episode_gap_weeks": {"2"}, "closure_days": {"2026-12-24\n2026-12-25"}}
	res, body = a.postFormBody(admin, "/admin/study", form)
	if res.StatusCode != http.StatusUnprocessableEntity || !strings.Contains(body, `data-testid="error-time_zone"`) || !strings.Contains(body, `data-testid="error-over_read_within_days"`) {
		t.Fatalf("invalid settings: status %d", res.StatusCode)
	}
	form.Set("time_zone", "America/Denver")
	form.Set("over_read_within_days", "6")
	if res := a.postForm(admin, "/admin/study", form); res.StatusCode != http.StatusSeeOther {
		t.Fatalf("save: status %d", res.StatusCode)
	}
	_, body = a.get(admin, "/admin/study?saved=1")
	if !strings.Contains(body, `value="America/Denver"`) || !strings.Contains(body, "24 Dec 2026\n25 Dec 2026") || !strings.Contains(body, `data-testid="settings-saved"`) {
		t.Fatal("saved settings not shown")
	}
	if res, _ := a.get(a.signIn(cohort.Coordinator), "/admin/study"); res.StatusCode != http.StatusForbidden {
		t.Fatalf("coordinator: status %d, want 403", res.StatusCode)
	}
	var n int
	a.store.Pool().QueryRow(context.Background(), `SELECT count(*) FROM audit_events WHERE action = 'study.update'`).Scan(&n)
	if n != 1 {
		t.Fatalf("settings audit events %d, want 1", n)
	}
}

// FuzzCaseRefs feeds arbitrary bulk selections: never a panic, and an
// accepted selection writes back to the same values.
func FuzzCaseRefs(f *testing.F) {
	for _, seed := range []string{"12:3", "0:0", "-1:2", "12", ":", "12:", "a:b", "9223372036854775807:1", "12:3:4", " 12:3"} {
		f.Add(seed)
	}
	f.Fuzz(func(t *testing.T, v string) {
		refs, err := caseRefs([]string{v})
		if err != nil {
			return
		}
		if len(refs) != 1 {
			t.Fatalf("%q: %d refs", v, len(refs))
		}
		back := fmt.Sprintf("%d:%d", refs[0].ID, refs[0].Version)
		again, err := caseRefs([]string{back})
		if err != nil || again[0] != refs[0] {
			t.Fatalf("%q: %q reads back as %v (%v)", v, back, again, err)
		}
	})
}
