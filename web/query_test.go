package web

import (
	"context"
	"encoding/base64"
	"fmt"
	"net/http"
	"net/url"
	"regexp"
	"strings"
	"testing"

	"cohortdesk/cohort"
)

// TestTamperedQueryIsBadRequest asks every page that reads its query string
// for addresses a person could only make by editing them: numbers too large
// for any integer, negative and out-of-range values, unknown choices,
// malformed and forged keyset cursors, control characters and overlong
// text. Each is refused with 400 and a message naming the parameter, never
// a server error, never silently ignored; the same pages with sound values
// answer 200.
func TestTamperedQueryIsBadRequest(t *testing.T) {
	a := newApp(t)
	loadDemo(t, a, 12)
	var pid int64
	a.store.Pool().QueryRow(context.Background(), `SELECT min(id) FROM participants`).Scan(&pid)
	forged := func(key string) string { return cursorText(`{"k":` + key + `,"i":1}`) }
	huge := "99999999999999999999"
	long := strings.Repeat("x", 2700)
	for _, c := range []struct {
		role  cohort.Role
		path  string
		param string // named in the message
	}{
		{cohort.Coordinator, "/participants?positive=" + huge, "positive"},
		{cohort.Coordinator, "/participants?positive=-1", "positive"},
		{cohort.Coordinator, "/participants?positive=0", "positive"},
		{cohort.Coordinator, "/participants?site=abc", "site"},
		{cohort.Coordinator, "/participants?site=999999", "site"},
		{cohort.Coordinator, "/participants?status=gone", "status"},
		{cohort.Coordinator, "/participants?sort=name", "sort"},
		{cohort.Coordinator, "/participants?desc=yes", "desc"},
		{cohort.Coordinator, "/participants?after=%%%", "address"},
		{cohort.Coordinator, "/participants?after=bm90IGpzb24", "after"},
		{cohort.Coordinator, "/participants?sort=enrolled&after=" + forged(`"not a date"`), "after"},
		{cohort.Coordinator, "/participants?sort=enrolled&after=" + forged(`"0000-01-01X"`), "after"},
		{cohort.Coordinator, "/participants?after=" + forged(`"A\u0000B"`), "after"},
		{cohort.Coordinator, "/participants?q=%00", "q"},
		{cohort.Coordinator, "/participants?q=" + long, "q"},
		{cohort.Monitor, "/participants.csv?positive=" + huge, "positive"},
		{cohort.Monitor, "/participants.csv?sort=enrolled&after=" + forged(`"x"`) + "&status=x", "status"},
		{cohort.Coordinator, "/participants?site=1;status=x", "address"},
		{cohort.Coordinator, fmt.Sprintf("/participants/%d?week=%s", pid, huge), "week"},
		{cohort.Coordinator, fmt.Sprintf("/participants/%d?week=-3", pid), "week"},
		{cohort.Coordinator, "/cases?after=" + forged(`"yesterday"`), "after"},
		{cohort.Coordinator, "/cases?after=" + forged(`"0000-01-01T00:00:00Z"`), "after"},
		{cohort.Coordinator, "/cases?after=%%%", "address"},
		{cohort.Coordinator, "/cases?state=lost", "state"},
		{cohort.Coordinator, "/cases?owner=" + huge, "owner"},
		{cohort.Coordinator, "/cases?owner=nobody", "owner"},
		{cohort.Coordinator, "/cases?site=" + huge, "site"},
		{cohort.Coordinator, "/cases?overdue=1", "overdue"},
		{cohort.Monitor, "/cases?owner=me", "owner"},
		{cohort.Investigator, "/progress?window=" + huge, "window"},
		{cohort.Investigator, "/progress?window=1", "window"},
		{cohort.Investigator, "/progress?protocol=" + huge, "protocol"},
		{cohort.Investigator, "/progress?from=2026-13-01", "from"},
		{cohort.Investigator, "/progress/cascade/enrolled?after=" + huge, "after"},
		{cohort.Investigator, "/progress/cascade/enrolled?exit=bogus", "exit"},
		{cohort.Investigator, "/progress/report?paper=legal", "paper"},
		{cohort.Investigator, "/progress/report.zip?window=0", "window"},
		{cohort.Monitor, "/confirmations/statistics?protocol=" + huge, "protocol"},
		{cohort.Monitor, "/confirmations/statistics?site=-2", "site"},
		{cohort.Monitor, "/confirmations/statistics?protocol=abc", "protocol"},
		{cohort.Monitor, "/confirmations/statistics.csv?site=x", "site"},
		{cohort.Monitor, "/confirmations/statistics.csv?table=all", "table"},
		{cohort.Admin, "/admin/audit?before=" + huge, "before"},
		{cohort.Admin, "/admin/audit?actor=" + long, "actor"}, // a name is searched for (TestAdministrationSaysWhatChanged); too long is refused
		{cohort.Admin, "/admin/audit?from=yesterday", "from"},
		{cohort.Admin, "/admin/audit?object_id=" + long, "object_id"},
		{cohort.Admin, "/admin/audit.csv?to=2026-02-30", "to"},
		{cohort.Investigator, "/sweep?run=" + huge, "run"},
		{cohort.Investigator, "/sweep?run=abc", "run"},
		{cohort.Investigator, "/sweep?protocol=" + huge, "protocol"},
		{cohort.Investigator, "/sweep?param=nothing", "param"},
		{cohort.Investigator, "/sweep?steps=" + huge, "steps"},
		{cohort.Coordinator, fmt.Sprintf("/participants/%d/referral?case=%s", pid, huge), "case"},
		{cohort.Coordinator, fmt.Sprintf("/participants/%d/referral?paper=legal", pid), "paper"},
		{cohort.Coordinator, "/referrals/new?study_id=%00", "study_id"},
	} {
		res, body := a.get(a.signIn(c.role), c.path)
		if res.StatusCode != http.StatusBadRequest {
			t.Errorf("%s %s: status %d, want 400", c.role, c.path[:min(len(c.path), 90)], res.StatusCode)
			continue
		}
		text := stripTags(body)
		if !strings.Contains(text, c.param) {
			t.Errorf("%s %s: the answer does not name %q: %.300s", c.role, c.path[:min(len(c.path), 90)], c.param, text)
		}
	}
	// Sound values: the same pages answer.
	for _, c := range []struct {
		role cohort.Role
		path string
	}{
		{cohort.Coordinator, "/participants?positive=4&status=active&sort=enrolled&desc=on&open_case=on&q=Q"},
		{cohort.Coordinator, "/cases?state=all&owner=me&overdue=on"},
		{cohort.Investigator, "/progress?window=4"},
		{cohort.Monitor, "/confirmations/statistics.csv?table=km"},
		{cohort.Admin, "/admin/audit?from=2026-01-01&to=2026-12-31&action=case."},
		{cohort.Coordinator, fmt.Sprintf("/participants/%d?week=1", pid)},
		{cohort.Coordinator, fmt.Sprintf("/participants/%d/referral?case=0&paper=letter", pid)},
	} {
		if res, _ := a.get(a.signIn(c.role), c.path); res.StatusCode != http.StatusOK {
			t.Errorf("%s %s: status %d, want 200", c.role, c.path, res.StatusCode)
		}
	}
}

// TestKeysetPagesStillFollow walks the participant list (in each order) and
// the case list page by page with the cursors the pages make: every link the
// app writes passes the strict reading.
func TestKeysetPagesStillFollow(t *testing.T) {
	a := newApp(t)
	loadDemo(t, a, 120)
	// More cases than one page holds, half with nothing due (the cursor's
	// "infinity"), half due at distinct times.
	a.exec(`INSERT INTO cases (participant_id, protocol_id, first_week, last_week, state, flagged_at, due_at)
		SELECT p.id, (SELECT min(id) FROM protocols), 90 + g % 50, 90 + g % 50, 'open', now(),
		       CASE WHEN g % 2 = 0 THEN now() + g * interval '1 minute' END
		FROM generate_series(1, 130) g JOIN LATERAL (SELECT id FROM participants ORDER BY id OFFSET g % 50 LIMIT 1) p ON true`)
	c := a.signIn(cohort.Coordinator)
	for _, start := range []string{"/participants?sort=study_id", "/participants?sort=enrolled&desc=on", "/participants?sort=site", "/cases?state=all"} {
		path, pages := start, 0
		for path != "" && pages < 20 {
			res, body := a.get(c, path)
			if res.StatusCode != http.StatusOK {
				t.Fatalf("%s: status %d", path, res.StatusCode)
			}
			pages++
			path = ""
			if m := nextPageRE.FindStringSubmatch(body); m != nil {
				path = strings.ReplaceAll(m[1], "&amp;", "&")
			}
		}
		if pages < 2 {
			t.Errorf("%s: %d pages, want more than one to test the cursor", start, pages)
		}
	}
}

// cursorText encodes a cursor's JSON as the lists do (db.encodeCursor).
func cursorText(js string) string {
	return url.QueryEscape(base64.RawURLEncoding.EncodeToString([]byte(js)))
}

var nextPageRE = regexp.MustCompile(`href="([^"]+)"[^>]*data-testid="next-page"`)
