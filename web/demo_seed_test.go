package web

import (
	"context"
	"testing"

	"cohortdesk/cohort/demo"
)

// TestDemoCasesOpenWhenTheirWeekIsFlagged: the demo's history reads as a
// study that ran, so each case's opening is audited at its own flag time,
// with nothing of the case before it - not at an earlier episode of the
// same participant.
func TestDemoCasesOpenWhenTheirWeekIsFlagged(t *testing.T) {
	a := newAppAt(t, demo.DefaultToday())
	loadDemo(t, a, 80)
	var cases, wrong, early int
	err := a.store.Pool().QueryRow(context.Background(), `
		SELECT count(*),
		       count(*) FILTER (WHERE o.at IS DISTINCT FROM c.flagged_at),
		       count(*) FILTER (WHERE EXISTS (SELECT 1 FROM audit_events e WHERE e.object_type = 'case' AND e.object_id = c.id::text AND e.at < o.at))
		FROM cases c
		LEFT JOIN LATERAL (SELECT min(at) AS at FROM audit_events a WHERE a.object_type = 'case' AND a.object_id = c.id::text AND a.action = 'case.open') o ON true`).
		Scan(&cases, &wrong, &early)
	if err != nil {
		t.Fatal(err)
	}
	if cases < 5 || wrong != 0 || early != 0 {
		t.Fatalf("%d cases: %d opened at another time than their flag, %d with events before their opening", cases, wrong, early)
	}
}
