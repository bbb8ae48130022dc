package web

import (
	"context"
	"fmt"
	"net/http"
	"net/url"
	"strconv"
	"strings"
	"testing"

	"cohortdesk/cohort"
	"cohortdesk/cohort/demo"
)

// TestSameFigureOnEveryPage (issue 19, finding 2) loads the demo study and
// reads each figure that more than one page or file shows, where each shows
// it: the start page, triage, the participants list and its CSV, the case
// list, the confirmations page, the progress page, the weekly report and its
// CSV bundle, the exports page and the de-identified dataset. Each figure
// must be the same number everywhere, in the unit its label names:
//
//   - participants enrolled, active, completed and withdrawn (participants);
//   - cases referred (cases), which are the summaries signed off, and the
//     participants they belong to;
//   - recordings waiting for an over-read (recordings): none on a case that
//     ended, none marked as needing no read;
//   - cases waiting for an over-read, and the cases still being worked (cases).
func TestSameFigureOnEveryPage(t *testing.T) {
	a := newAppAt(t, demo.DefaultToday())
	loadDemo(t, a, 80)
	ctx := context.Background()
	// A study of 12 weeks of follow-up, so some participants have completed.
	a.exec(`INSERT INTO study (id, name, time_zone, follow_up_weeks) VALUES (1, 'Figures study', 'America/Chicago', 12)
		ON CONFLICT (id) DO UPDATE SET follow_up_weeks = 12`)
	// Recordings without a reading: one on a referred case (the case ended:
	// not waiting), two on a case still worked, one of which an
	// investigator marks as needing no read.
	var referredCase, workingCase int64
	if err := a.store.Pool().QueryRow(ctx, `SELECT id FROM cases WHERE state = 'referred' ORDER BY id LIMIT 1`).Scan(&referredCase); err != nil {
		t.Fatalf("the demo has no referred case: %v", err)
	}
	if err := a.store.Pool().QueryRow(ctx, `SELECT id FROM cases WHERE state IN ('recording_received', 'over_read', 'recorder_sent') ORDER BY id LIMIT 1`).Scan(&workingCase); err != nil {
		t.Fatalf("the demo has no case with a recorder out: %v", err)
	}
	var marked int64
	for i, c := range []int64{referredCase, workingCase, workingCase} {
		var id int64
		if err := a.store.Pool().QueryRow(ctx, `INSERT INTO recordings (case_id, participant_id, taken_at, duration_s)
			SELECT id, participant_id, flagged_at + interval '3 days', 41 FROM cases WHERE id = $1 RETURNING id`, c).Scan(&id); err != nil {
			t.Fatal(err)
		}
		if i == 2 {
			marked = id
		}
	}
	inv := a.signIn(cohort.Investigator)
	if res := a.postForm(inv, fmt.Sprintf("/recordings/%d/not-needed", marked), url.Values{"reason": {"a repeat was taken"}}); res.StatusCode != http.StatusSeeOther {
		t.Fatalf("mark: status %d", res.StatusCode)
	}

	coord := a.signIn(cohort.Coordinator)
	get := func(c *http.Client, path string) string {
		t.Helper()
		res, body := a.get(c, path)
		if res.StatusCode != http.StatusOK {
			t.Fatalf("%s: status %d", path, res.StatusCode)
		}
		return body
	}
	num := func(where, s string) int {
		t.Helper()
		// A figure is the first number of its element: "12 cases match".
		f := strings.Fields(s)
		if len(f) == 0 {
			t.Fatalf("%s: no figure", where)
		}
		n, err := strconv.Atoi(f[0])
		if err != nil {
			t.Fatalf("%s: %q is no count", where, s)
		}
		return n
	}
	// same checks that every reading of one figure is the same number.
	same := func(figure string, readings map[string]int) int {
		t.Helper()
		first, v := "", 0
		for where, n := range readings {
			if first == "" {
				first, v = where, n
				continue
			}
			if n != v {
				t.Errorf("%s: %s shows %d, %s shows %d", figure, first, v, where, n)
			}
		}
		return v
	}
	home, triage, participants := get(coord, "/"), get(coord, "/triage"), get(coord, "/participants")
	progress, report, confirmations, exports := get(coord, "/progress"), get(coord, "/progress/report"), get(coord, "/confirmations"), get(coord, "/exports")
	_, zipBody := a.get(coord, "/progress/report.zip")
	files := bundle(t, []byte(zipBody))
	summary := map[string]string{}
	for _, r := range csvRecords(t, files["summary.csv"]) {
		summary[r["figure"]] = r["value"]
	}
	boxes := map[string]map[string]string{}
	for _, r := range csvRecords(t, files["cascade.csv"]) {
		boxes[r["box"]] = r
	}
	_, ds := a.post(inv, "/exports/dataset", nil)
	dataset := unzip(t, ds)

	// Participants by status.
	res, csvBody := a.get(coord, "/participants.csv")
	if res.StatusCode != http.StatusOK {
		t.Fatalf("participants.csv: status %d", res.StatusCode)
	}
	byStatus := map[string]int{}
	rows := csvRecords(t, []byte(csvBody))
	for _, r := range rows {
		byStatus[r["status"]]++
	}
	enrolled := same("participants enrolled", map[string]int{
		"the start page":             num("start page", byTestID(home, "tile-participants")),
		"the participants list":      num("participants list", byTestID(participants, "count-total")),
		"participants.csv":           len(rows),
		"the progress cascade":       num("progress", byTestID(progress, "cascade-count-enrolled")),
		"the weekly report":          num("report", byTestID(report, "cascade-count-enrolled")),
		"the report's cascade.csv":   num("cascade.csv", boxes["enrolled"]["participants"]),
		"the report's summary.csv":   num("summary.csv", summary["cascade_enrolled"]),
		"the dataset's participants": len(csvRecords(t, dataset["participants.csv"])),
	})
	total := 0
	for _, st := range cohort.ParticipantStatuses() {
		key := string(st)
		n := same("participants "+key, map[string]int{
			"the start page":                 num("start page "+key, byTestID(home, "tile-"+key)),
			"the participants list":          num("participants list "+key, byTestID(participants, "count-"+key)),
			"the participants list filtered": num("filtered "+key, byTestID(get(coord, "/participants?status="+key), "count-total")),
			"participants.csv":               byStatus[key],
			"participants.csv filtered":      len(csvRecordsOrNone(t, get(coord, "/participants.csv?status="+key))),
		})
		total += n
		t.Logf("participants %s: %d", key, n)
	}
	if total != enrolled || byStatus["completed"] == 0 || byStatus["active"] == 0 {
		t.Errorf("statuses add up to %d of %d enrolled (by status %v): the demo should have active and completed participants", total, enrolled, byStatus)
	}
	if !strings.Contains(participants, `<option value="completed"`) {
		t.Error("the participants list's status filter has no completed")
	}
	withdrawn := 0
	for _, e := range csvRecords(t, files["enrolment.csv"]) {
		if e["site"] != "all" && e["site"] != "" {
			withdrawn += num("enrolment.csv withdrawn", e["withdrawn"])
		}
	}
	if withdrawn != byStatus["withdrawn"] {
		t.Errorf("withdrawn: enrolment.csv %d, participants.csv %d", withdrawn, byStatus["withdrawn"])
	}

	// Cases referred: the cases in that state are the summaries signed off
	// and the cascade's referred episodes.
	referredCases := 0
	for _, r := range csvRecords(t, dataset["cases.csv"]) {
		if r["case_state"] == "referred" {
			referredCases++
		}
	}
	referred := same("cases referred", map[string]int{
		"the start page":           num("start page referred", byTestID(home, "home-count-referred")),
		"the case list":            num("case list", byTestID(get(coord, "/cases?state=referred"), "case-total")),
		"the progress cascade":     num("progress", byTestID(progress, "cascade-cases-referred")),
		"the weekly report":        num("report", byTestID(report, "cascade-cases-referred")),
		"the report's cascade.csv": num("cascade.csv", boxes["referred"]["flagged_episodes"]),
		"the exports page":         num("exports", byTestID(exports, "summaries-signed")),
		"the dataset's cases.csv":  referredCases,
	})
	same("participants referred", map[string]int{
		"the progress cascade":     num("progress", byTestID(progress, "cascade-count-referred")),
		"the weekly report":        num("report", byTestID(report, "cascade-count-referred")),
		"the report's cascade.csv": num("cascade.csv", boxes["referred"]["participants"]),
		"the report's summary.csv": num("summary.csv", summary["cascade_referred"]),
	})
	if referred == 0 {
		t.Fatal("the demo has no referred case: the comparison is empty")
	}

	// Recordings waiting for an over-read.
	waiting := same("recordings waiting for an over-read", map[string]int{
		"the start page":         num("start page", byTestID(home, "tile-awaiting-read")),
		"triage":                 num("triage", byTestID(triage, "count-recordings")),
		"the confirmations page": num("confirmations", byTestID(confirmations, "unread-count")),
		"the confirmations list": strings.Count(between(section(confirmations, "unread-table"), "<tbody>", "</tbody>"), "<tr"),
	})
	if strings.Contains(confirmations, fmt.Sprintf(`href="/recordings/%d"`, marked)) || waiting == 0 {
		t.Errorf("%d recordings waiting; the one marked as needing no read is listed: %v", waiting,
			strings.Contains(confirmations, fmt.Sprintf(`href="/recordings/%d"`, marked)))
	}
	var onEnded int
	a.store.Pool().QueryRow(ctx, `SELECT count(*) FROM recordings r JOIN cases c ON c.id = r.case_id
		WHERE c.closed_at IS NOT NULL AND NOT EXISTS (SELECT 1 FROM over_reads o WHERE o.recording_id = r.id)`).Scan(&onEnded)
	if onEnded == 0 {
		t.Error("no unread recording on an ended case: the check that they leave the queue is empty")
	}

	// Cases waiting for an over-read, and the cases still worked: every
	// triage group and the rest on schedule are the case list's working
	// cases.
	same("cases waiting for an over-read", map[string]int{
		"the start page": num("start page", byTestID(home, "tile-work-overread")),
		"triage":         num("triage", byTestID(triage, "count-overread")),
	})
	inTriage := num("triage scheduled", byTestID(triage, "count-scheduled"))
	for _, key := range []string{"overdue", "today", "new", "overread", "mine"} {
		inTriage += num("triage "+key, byTestID(triage, "count-"+key))
	}
	working := 0
	for _, key := range testIDs(home, "home-count-") {
		st := strings.TrimPrefix(key, "home-count-")
		if st == "referred" || strings.HasPrefix(st, "closed_") {
			continue
		}
		working += num("start page "+st, byTestID(home, key))
	}
	same("cases still being worked", map[string]int{
		"triage":         inTriage,
		"the start page": working,
		"the case list":  num("case list", byTestID(get(coord, "/cases"), "case-total")),
	})
}

// csvRecordsOrNone reads a CSV download that may hold its header only.
func csvRecordsOrNone(t *testing.T, body string) []map[string]string {
	t.Helper()
	if strings.Count(strings.TrimSpace(body), "\n") == 0 {
		return nil
	}
	return csvRecords(t, []byte(body))
}
