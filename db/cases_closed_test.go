package db_test

import (
	"context"
	"errors"
	"strings"
	"testing"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
	"cohortdesk/db"
)

// TestClosedCaseTakesNoAttempt closes a case and then tries every way a
// contact attempt is logged (one attempt, a bulk letter): each is refused by
// the step table with a message that says the case is final, and nothing is
// stored: no attempt row, no new version, no audit event.
func TestClosedCaseTakesNoAttempt(t *testing.T) {
	f := newCaseFixture(t, 1)
	f.positive(f.proto, "P1", 3)
	f.sync()
	ctx := context.Background()
	id := f.caseID("P1")
	c, err := f.s.CloseCase(ctx, f.coord, id, db.MoveInput{Version: 1, To: followup.ClosedUnreachable, Reason: "no answer in six weeks"})
	if err != nil {
		t.Fatal(err)
	}
	count := func() (attempts, events int) {
		t.Helper()
		f.s.Pool().QueryRow(ctx, `SELECT count(*) FROM contact_attempts WHERE case_id = $1`, id).Scan(&attempts)
		f.s.Pool().QueryRow(ctx, `SELECT count(*) FROM audit_events WHERE object_type = 'case' AND object_id = $1::text`, id).Scan(&events)
		return attempts, events
	}
	a0, e0 := count()
	var ve *cohort.ValidationError
	_, err = f.s.LogAttempt(ctx, f.coord, id, db.AttemptInput{Version: c.Version, Channel: followup.ChannelPhone, Outcome: followup.OutcomeReached, Note: "picked up"})
	if !errors.As(err, &ve) || !strings.Contains(ve.Fields["state"], "which is final") {
		t.Fatalf("attempt on a closed case: %v, want the step table's refusal", err)
	}
	_, err = f.s.LogLetters(ctx, f.coord, []db.CaseRef{{ID: id, Version: c.Version}}, "reminder letter")
	if !errors.As(err, &ve) || !strings.Contains(ve.Error(), "which is final") {
		t.Fatalf("letter on a closed case: %v, want the step table's refusal", err)
	}
	if a, e := count(); a != a0 || e != e0 {
		t.Errorf("refused attempts stored something: attempts %d -> %d, audit events %d -> %d", a0, a, e0, e)
	}
	if got := f.get(id); got.State != followup.ClosedUnreachable || got.Version != c.Version {
		t.Errorf("refused attempts changed the case: %s v%d", got.State, got.Version)
	}
}
