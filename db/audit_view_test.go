package db_test

import (
	"context"
	"encoding/json"
	"slices"
	"strconv"
	"strings"
	"testing"

	"cohortdesk/db"
)

// TestAuditChangesAreTheChangedFields: a settings change is shown as the
// fields it changed with their values before and after, not as two whole
// objects; an event that creates something lists what it set; a case's
// version counter is left out.
func TestAuditChangesAreTheChangedFields(t *testing.T) {
	ev := db.AuditEvent{
		Old: json.RawMessage(`{"name": "Rhythm study", "service_levels": {"MaxAttempts": 5, "OverReadWithinDays": 3}, "closure_days": ["2026-12-24"], "version": 4}`),
		New: json.RawMessage(`{"name": "Rhythm study", "service_levels": {"MaxAttempts": 5, "OverReadWithinDays": 5}, "closure_days": ["2026-12-24", "2026-12-25"], "version": 5, "cases_rescheduled": 7}`),
	}
	want := []db.AuditChange{
		{Field: "service_levels.OverReadWithinDays", Before: "3", After: "5"},
		{Field: "closure_days", Before: "2026-12-24", After: "2026-12-24, 2026-12-25"},
		{Field: "cases_rescheduled", Before: "", After: "7"},
	}
	if got := ev.Changes(); !slices.Equal(got, want) {
		t.Errorf("changes %+v, want %+v", got, want)
	}
	created := db.AuditEvent{New: json.RawMessage(`{"study_id": "QRW-0001-A", "windows": [{"minutes": 5}, {"minutes": 30}], "active": true}`)}
	want = []db.AuditChange{{Field: "study_id", After: "QRW-0001-A"}, {Field: "windows[0].minutes", After: "5"}, {Field: "windows[1].minutes", After: "30"},
		{Field: "active", After: "yes"}}
	if got := created.Changes(); !slices.Equal(got, want) {
		t.Errorf("creation %+v, want %+v", got, want)
	}
	removed := db.AuditEvent{Old: json.RawMessage(`{"withdrawn_on": "2026-05-01"}`), New: json.RawMessage(`{"withdrawn_on": null}`)}
	want = []db.AuditChange{{Field: "withdrawn_on", Before: "2026-05-01"}}
	if got := removed.Changes(); !slices.Equal(got, want) {
		t.Errorf("a value taken away %+v, want %+v", got, want)
	}
}

// TestAuditFiltersByStudyIDAndPerson: the objects of a participant (the
// participant, their case) are found by study ID and carry it; a person is
// found by a part of their name or e-mail; a study ID nobody has and a name
// nobody has are said so, never silently ignored.
func TestAuditFiltersByStudyIDAndPerson(t *testing.T) {
	f := newCaseFixture(t, 2)
	ctx := context.Background()
	f.positive(f.proto, "P1", 3)
	f.sync()
	id := f.caseID("P1")
	if _, err := f.s.AssignCase(ctx, f.coord, id, f.get(id).Version, f.coord.UserID); err != nil {
		t.Fatal(err)
	}
	if err := f.s.AddNote(ctx, f.inv, f.pids["P2"], "Called the site."); err != nil {
		t.Fatal(err)
	}
	evs, err := f.s.AuditEvents(ctx, db.AuditFilter{StudyID: "p1"})
	if err != nil {
		t.Fatal(err)
	}
	var actions []string
	for _, e := range evs {
		if e.StudyID != "P1" {
			t.Errorf("event %d (%s %s %s) carries study ID %q, want P1", e.ID, e.Action, e.ObjectType, e.ObjectID, e.StudyID)
		}
		actions = append(actions, e.Action)
	}
	if !slices.Contains(actions, "case.open") || !slices.Contains(actions, "case.assign") || slices.Contains(actions, "participant.note") {
		t.Errorf("events of P1: %v, want the opening and the assignment of its case and not P2's note", actions)
	}
	for _, who := range []string{"staff coord", "COORDINATOR@example", strconv.FormatInt(f.coord.UserID, 10)} {
		evs, err = f.s.AuditEvents(ctx, db.AuditFilter{Who: who})
		if err != nil {
			t.Fatal(err)
		}
		if len(evs) == 0 {
			t.Errorf("who %q: no event", who)
		}
		for _, e := range evs {
			if e.ActorID != f.coord.UserID {
				t.Errorf("who %q: event %d by %q", who, e.ID, e.Actor)
			}
		}
	}
	problems, err := f.s.AuditFilterProblems(ctx, db.AuditFilter{Who: "Zelda", StudyID: "QRW-9999-Z"})
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(problems["who"], "Zelda") || !strings.Contains(problems["study_id"], "QRW-9999-Z") {
		t.Errorf("problems %v, want both fields explained", problems)
	}
	if problems, _ := f.s.AuditFilterProblems(ctx, db.AuditFilter{Who: "staff", StudyID: "P2"}); len(problems) != 0 {
		t.Errorf("a filter that can match is reported as %v", problems)
	}
}
