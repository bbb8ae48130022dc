package web

import (
	"context"
	"encoding/csv"
	"encoding/json"
	"strings"
	"testing"

	"cohortdesk/cohort"
)

// TestReadsOfTheTrailAndListsAreAudited: opening the audit trail writes an
// audit.view event naming the events shown, and a download of the
// participant list names, in its audit event, the participants the file
// holds (as runs of ids), not only the filter.
func TestReadsOfTheTrailAndListsAreAudited(t *testing.T) {
	a := newApp(t)
	loadDemo(t, a, 12)
	ctx := context.Background()
	admin := a.signIn(cohort.Admin)
	if res, _ := a.get(admin, "/admin/audit?action=participant."); res.StatusCode != 200 {
		t.Fatalf("audit page: %d", res.StatusCode)
	}
	var raw []byte
	if err := a.store.Pool().QueryRow(ctx, `SELECT new_value FROM audit_events WHERE action = 'audit.view' ORDER BY id DESC LIMIT 1`).Scan(&raw); err != nil {
		t.Fatalf("no audit.view event: %v", err)
	}
	var view struct {
		Filter string  `json:"filter"`
		IDs    []int64 `json:"event_ids"`
	}
	json.Unmarshal(raw, &view)
	var want []int64
	rows, _ := a.store.Pool().Query(ctx, `SELECT id FROM audit_events WHERE action LIKE 'participant.%' AND action <> 'audit.view' ORDER BY id DESC LIMIT 100`)
	for rows.Next() {
		var id int64
		rows.Scan(&id)
		want = append(want, id)
	}
	rows.Close()
	if view.Filter != "action=participant." || len(view.IDs) == 0 || len(view.IDs) != len(want) || view.IDs[0] != want[0] {
		t.Errorf("audit.view event %+v, want the %d events shown (first %v)", view, len(want), want[:min(1, len(want))])
	}

	coord := a.signIn(cohort.Coordinator)
	_, body := a.get(coord, "/participants.csv?site=1")
	recs, err := csv.NewReader(strings.NewReader(body)).ReadAll()
	if err != nil || len(recs) < 2 {
		t.Fatalf("CSV: %v, %d records", err, len(recs))
	}
	inFile := map[int64]bool{}
	for _, r := range recs[1:] {
		var id int64
		if err := a.store.Pool().QueryRow(ctx, `SELECT id FROM participants WHERE study_id = $1`, r[0]).Scan(&id); err != nil {
			t.Fatal(err)
		}
		inFile[id] = true
	}
	if err := a.store.Pool().QueryRow(ctx, `SELECT new_value FROM audit_events WHERE action = 'participant.export_list' ORDER BY id DESC LIMIT 1`).Scan(&raw); err != nil {
		t.Fatal(err)
	}
	var export struct {
		Count int        `json:"count"`
		Runs  [][2]int64 `json:"participant_ids"`
	}
	if err := json.Unmarshal(raw, &export); err != nil {
		t.Fatalf("export event %s: %v", raw, err)
	}
	audited := map[int64]bool{}
	for _, run := range export.Runs {
		for id := run[0]; id <= run[1]; id++ {
			audited[id] = true
		}
	}
	if export.Count != len(inFile) || len(audited) != len(inFile) {
		t.Fatalf("export event names %d participants (count %d), the file holds %d", len(audited), export.Count, len(inFile))
	}
	for id := range inFile {
		if !audited[id] {
			t.Errorf("participant %d is in the file but not in its audit event", id)
		}
	}
}
