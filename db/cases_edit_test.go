package db_test

import (
	"context"
	"errors"
	"fmt"
	"slices"
	"strings"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
	"cohortdesk/db"
)

func TestIllegalMoveNamesAllowedStates(t *testing.T) {
	f := newCaseFixture(t, 1)
	f.positive(f.proto, "P1", 3)
	f.sync()
	id := f.caseID("P1")
	_, err := f.s.MoveCase(context.Background(), f.coord, id, db.MoveInput{Version: 1, To: "over_read"})
	var ve *cohort.ValidationError
	if !errors.As(err, &ve) {
		t.Fatalf("open -> over-read: %v, want a validation error", err)
	}
	for _, s := range followup.Next(followup.Open) {
		if !strings.Contains(ve.Fields["state"], s.Label()) {
			t.Errorf("message %q does not name allowed state %q", ve.Fields["state"], s.Label())
		}
	}
	if c := f.get(id); c.State != followup.Open || c.Version != 1 {
		t.Fatalf("refused move changed the case: %s v%d", c.State, c.Version)
	}
	// Closing needs a final state and a reason.
	if _, err := f.s.CloseCase(context.Background(), f.coord, id, db.MoveInput{Version: 1, To: "contacting", Reason: "x"}); !errors.As(err, &ve) || !strings.Contains(ve.Fields["state"], "closed (unreachable)") {
		t.Fatalf("close to a working state: %v", err)
	}
	if _, err := f.s.CloseCase(context.Background(), f.coord, id, db.MoveInput{Version: 1, To: "closed_unreachable"}); !errors.As(err, &ve) || ve.Fields["reason"] == "" {
		t.Fatalf("close without a reason: %v", err)
	}
}

func TestStaleEditIsRefusedWithWhatChanged(t *testing.T) {
	f := newCaseFixture(t, 1)
	f.positive(f.proto, "P1", 3)
	f.sync()
	ctx := context.Background()
	id := f.caseID("P1")
	if _, err := f.s.AssignCase(ctx, f.coord, id, 1, f.coord.UserID); err != nil {
		t.Fatal(err)
	}
	// The investigator opened version 1 too and tries to take the case.
	_, err := f.s.AssignCase(ctx, f.inv, id, 1, f.inv.UserID)
	var ce *cohort.ConflictError
	if !errors.As(err, &ce) || !errors.Is(err, cohort.ErrConflict) {
		t.Fatalf("stale assign: %v, want a conflict", err)
	}
	for _, want := range []string{`owner is now "Staff coordinator"`, "Staff coordinator (coordinator) changed the owner"} {
		if !strings.Contains(ce.Message, want) {
			t.Errorf("conflict message %q lacks %q", ce.Message, want)
		}
	}
	if got := ce.Changes["owner"]; got != [2]string{"Staff coordinator", "Staff investigator"} {
		t.Errorf("changes %v", ce.Changes)
	}
	// An edit that does not collide with the other change is still refused
	// (the case moved on), with the change named.
	if _, err := f.s.LogAttempt(ctx, f.coord, id, db.AttemptInput{Version: 2, Channel: "phone", Outcome: "no_answer"}); err != nil {
		t.Fatal(err)
	}
	_, err = f.s.SetCaseNote(ctx, f.inv, id, 2, "call after 5 pm")
	if !errors.As(err, &ce) || !strings.Contains(ce.Message, `state is now "contacting"`) || !strings.Contains(ce.Message, "logged a contact attempt") {
		t.Fatalf("stale note: %v", err)
	}
	if c := f.get(id); c.Note != "" || c.Version != 3 {
		t.Fatalf("stale edit was applied: note %q v%d", c.Note, c.Version)
	}
}

// TestConcurrentWritersLoseNoUpdate runs writers at the same time on one case
// against the real database. Two people assigning from the same version: one
// wins, the other is told. Writers that retry after a refusal: every attempt
// is kept.
func TestConcurrentWritersLoseNoUpdate(t *testing.T) {
	f := newCaseFixture(t, 1)
	f.positive(f.proto, "P1", 3)
	f.sync()
	ctx := context.Background()
	id := f.caseID("P1")

	start := make(chan struct{})
	errs := make([]error, 2)
	var wg sync.WaitGroup
	for i, a := range []cohort.Actor{f.coord, f.inv} {
		wg.Add(1)
		go func() {
			defer wg.Done()
			<-start
			_, errs[i] = f.s.AssignCase(ctx, a, id, 1, a.UserID)
		}()
	}
	close(start)
	wg.Wait()
	won := -1
	for i, err := range errs {
		var ce *cohort.ConflictError
		switch {
		case err == nil:
			if won >= 0 {
				t.Fatal("both writers saved from the same version")
			}
			won = i
		case !errors.As(err, &ce):
			t.Fatalf("writer %d: %v, want a conflict", i, err)
		}
	}
	if won < 0 {
		t.Fatal("neither writer saved")
	}
	winner := []cohort.Actor{f.coord, f.inv}[won]
	if c := f.get(id); c.OwnerID != winner.UserID || c.Version != 2 {
		t.Fatalf("owner %d v%d, want %d v2", c.OwnerID, c.Version, winner.UserID)
	}

	const writers = 8
	start = make(chan struct{})
	var refused atomic.Int64
	for w := range writers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			<-start
			for {
				c, err := f.s.Case(ctx, id)
				if err != nil {
					t.Error(err)
					return
				}
				_, err = f.s.LogAttempt(ctx, f.coord, id, db.AttemptInput{Version: c.Version, Channel: "phone", Outcome: "no_answer", Note: fmt.Sprint("writer ", w)})
				var ce *cohort.ConflictError
				if errors.As(err, &ce) {
					refused.Add(1)
					continue
				}
				if err != nil {
					t.Error(err)
				}
				return
			}
		}()
	}
	close(start)
	wg.Wait()
	if got := f.count(`SELECT count(*) FROM contact_attempts WHERE case_id = $1`, id); got != writers {
		t.Fatalf("%d attempts stored, want %d", got, writers)
	}
	if got := f.count(`SELECT count(*) FROM audit_events WHERE action = 'case.attempt' AND object_id = $1`, fmt.Sprint(id)); got != writers {
		t.Fatalf("%d attempt audit events, want %d", got, writers)
	}
	if c := f.get(id); c.Version != 2+writers {
		t.Fatalf("version %d, want %d", c.Version, 2+writers)
	}
	t.Logf("%d saves were refused as stale and retried", refused.Load())
}

func TestCaseLifecycleIsAuditedAndScheduled(t *testing.T) {
	f := newCaseFixture(t, 1)
	f.positive(f.proto, "P1", 3, 4)
	f.sync()
	ctx := context.Background()
	id := f.caseID("P1")
	v := 1
	step := func(name string, fn func(v int) (db.Case, error)) db.Case {
		t.Helper()
		c, err := fn(v)
		if err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		if c.Version != v+1 {
			t.Fatalf("%s: version %d, want %d", name, c.Version, v+1)
		}
		v = c.Version
		return c
	}
	step("assign", func(v int) (db.Case, error) { return f.s.AssignCase(ctx, f.coord, id, v, f.coord.UserID) })
	c := step("no answer", func(v int) (db.Case, error) {
		return f.s.LogAttempt(ctx, f.coord, id, db.AttemptInput{Version: v, Channel: "phone", Outcome: "no_answer"})
	})
	if c.State != followup.Contacting || c.NextAction != followup.ActionNextAttempt {
		t.Fatalf("after no answer: %s / %s", c.State, c.NextAction)
	}
	c = step("reached", func(v int) (db.Case, error) {
		return f.s.LogAttempt(ctx, f.coord, id, db.AttemptInput{Version: v, Channel: "phone", Outcome: "reached", Note: "agreed to record"})
	})
	if c.State != followup.Reached || c.NextAction != followup.ActionSendRecorder || !c.ReachedAt.Equal(fixedNow) {
		t.Fatalf("after reaching: %s / %s / %v", c.State, c.NextAction, c.ReachedAt)
	}
	// Shipment dates: not in the future, not before the participant was reached.
	var ve *cohort.ValidationError
	if _, err := f.s.RecordShipment(ctx, f.coord, id, v, day(2026, 6, 2), "TRK1"); !errors.As(err, &ve) || ve.Fields["sent_on"] == "" {
		t.Fatalf("future shipment date: %v", err)
	}
	if _, err := f.s.RecordShipment(ctx, f.coord, id, v, day(2026, 5, 31), "TRK1"); !errors.As(err, &ve) || ve.Fields["sent_on"] == "" {
		t.Fatalf("shipment before reaching: %v", err)
	}
	c = step("shipped", func(v int) (db.Case, error) {
		return f.s.RecordShipment(ctx, f.coord, id, v, day(2026, 6, 1), "TRK-0042")
	})
	// Sent Monday 1 June; the recording is due back 14 working days later,
	// Friday 19 June, by its end (computed by hand: two weeks of five working
	// days from Tuesday 2 June, then four more; the 14 days are our
	// illustrative default).
	if c.State != followup.RecorderSent || c.TrackingNumber != "TRK-0042" || !c.DueAt.Equal(time.Date(2026, 6, 20, 0, 0, 0, 0, time.UTC)) {
		t.Fatalf("after shipping: %s %q due %v", c.State, c.TrackingNumber, c.DueAt)
	}
	f.clock.set(fixedNow.Add(72 * time.Hour))
	c = step("back", func(v int) (db.Case, error) { return f.s.RecordReturn(ctx, f.coord, id, v, day(2026, 6, 4)) })
	if c.State != followup.RecordingReceived || c.NextAction != followup.ActionOverRead {
		t.Fatalf("after the return: %s / %s", c.State, c.NextAction)
	}
	step("note", func(v int) (db.Case, error) { return f.s.SetCaseNote(ctx, f.coord, id, v, "prefers e-mail") })
	step("over-read", func(v int) (db.Case, error) {
		return f.s.MoveCase(ctx, f.inv, id, db.MoveInput{Version: v, To: "over_read"})
	})
	c = step("close", func(v int) (db.Case, error) {
		return f.s.CloseCase(ctx, f.inv, id, db.MoveInput{Version: v, To: "closed_not_confirmed", Reason: "sinus rhythm on the over-read"})
	})
	if c.ClosedAt.IsZero() || c.NextAction != "" || !c.DueAt.IsZero() {
		t.Fatalf("closed case: closed %v, next %q due %v", c.ClosedAt, c.NextAction, c.DueAt)
	}

	// Every change left an audit event with the old and the new case.
	rows, err := f.s.Pool().Query(ctx, `SELECT action, old_value IS NOT NULL, (new_value->>'version')::int FROM audit_events
		WHERE object_type = 'case' AND object_id = $1 ORDER BY id`, fmt.Sprint(id))
	if err != nil {
		t.Fatal(err)
	}
	var got []string
	for rows.Next() {
		var action string
		var hasOld bool
		var version int
		if err := rows.Scan(&action, &hasOld, &version); err != nil {
			t.Fatal(err)
		}
		if action != "case.open" && !hasOld {
			t.Errorf("%s without the old value", action)
		}
		got = append(got, fmt.Sprintf("%s@%d", action, version))
	}
	want := []string{"case.open@1", "case.assign@2", "case.attempt@3", "case.attempt@4", "case.recorder_sent@5",
		"case.recording_back@6", "case.note@7", "case.move@8", "case.close@9"}
	if !slices.Equal(got, want) {
		t.Fatalf("audit trail\n got %v\nwant %v", got, want)
	}
	events, err := f.s.CaseTimeline(ctx, f.get(id), time.UTC)
	if err != nil {
		t.Fatal(err)
	}
	var attempts, changes int
	for _, e := range events {
		switch e.Kind {
		case db.EventAttempt:
			attempts++
		case db.EventChange:
			changes++
		}
	}
	if attempts != 2 || changes != 7 {
		t.Fatalf("timeline: %d attempts and %d changes, want 2 and 7", attempts, changes)
	}
}

func TestDeclineClosesAndWithdrawalClosesWorkingCases(t *testing.T) {
	f := newCaseFixture(t, 2)
	f.positive(f.proto, "P1", 3)
	f.positive(f.proto, "P2", 3, 12)
	f.sync()
	ctx := context.Background()
	c, err := f.s.LogAttempt(ctx, f.coord, f.caseID("P1"), db.AttemptInput{Version: 1, Channel: "email", Outcome: "declined"})
	if err != nil || c.State != followup.ClosedDeclined || c.ClosedAt.IsZero() {
		t.Fatalf("decline: %+v %v", c.State, err)
	}
	var first int64
	f.s.Pool().QueryRow(ctx, `SELECT id FROM cases WHERE participant_id = $1 AND first_week = 3`, f.pids["P2"]).Scan(&first)
	if _, err := f.s.CloseCase(ctx, f.coord, first, db.MoveInput{Version: 1, To: "closed_unreachable", Reason: "no number"}); err != nil {
		t.Fatal(err)
	}
	n, err := f.s.CloseCasesForWithdrawal(ctx, f.coord, f.pids["P2"])
	if err != nil || n != 1 {
		t.Fatalf("withdrawal closed %d cases (err %v), want 1 (the other is already closed)", n, err)
	}
	if got, want := f.casesOf("P2"), []string{"3-3:closed_unreachable", "12-12:closed_withdrawn"}; !slices.Equal(got, want) {
		t.Fatalf("cases %v, want %v", got, want)
	}
}

func TestBulkActionsAreAllOrNothing(t *testing.T) {
	f := newCaseFixture(t, 3)
	for _, p := range []string{"P1", "P2", "P3"} {
		f.positive(f.proto, p, 5)
	}
	f.sync()
	ctx := context.Background()
	ids := []int64{f.caseID("P1"), f.caseID("P2"), f.caseID("P3")}
	if _, err := f.s.SetCaseNote(ctx, f.coord, ids[1], 1, "busy"); err != nil {
		t.Fatal(err)
	}
	refs := []db.CaseRef{{ids[0], 1}, {ids[1], 1}, {ids[2], 1}} // ids[1] is stale
	if _, err := f.s.AssignCases(ctx, f.coord, refs, f.inv.UserID); !errors.Is(err, cohort.ErrConflict) || !strings.Contains(err.Error(), fmt.Sprintf("case %d", ids[1])) {
		t.Fatalf("bulk with a stale case: %v", err)
	}
	if n := f.count(`SELECT count(*) FROM cases WHERE owner_id IS NOT NULL`); n != 0 {
		t.Fatalf("a refused bulk assign changed %d cases", n)
	}
	refs[1].Version = 2
	if n, err := f.s.AssignCases(ctx, f.coord, refs, f.inv.UserID); err != nil || n != 3 {
		t.Fatalf("bulk assign: %d %v", n, err)
	}
	if n := f.count(`SELECT count(*) FROM audit_events WHERE action = 'case.assign' AND (new_value->>'bulk')::bool`); n != 3 {
		t.Fatalf("bulk assign audit events %d, want 3", n)
	}
	if _, err := f.s.AssignCases(ctx, f.coord, []db.CaseRef{{ids[0], 2}}, f.pids["P1"]+999); err == nil {
		t.Fatal("assigned to an unknown account")
	}
	refs = []db.CaseRef{{ids[0], 2}, {ids[1], 3}, {ids[2], 2}}
	if n, err := f.s.LogLetters(ctx, f.coord, refs, ""); err != nil || n != 3 {
		t.Fatalf("letters: %d %v", n, err)
	}
	if n := f.count(`SELECT count(*) FROM contact_attempts WHERE channel = 'letter' AND outcome = 'message_left' AND note = 'letter sent'`); n != 3 {
		t.Fatalf("letter attempts %d, want 3", n)
	}
	if n := f.count(`SELECT count(*) FROM cases WHERE state = 'contacting'`); n != 3 {
		t.Fatalf("cases moved to contacting: %d, want 3", n)
	}
	var ve *cohort.ValidationError
	if _, err := f.s.LogLetters(ctx, f.coord, nil, ""); !errors.As(err, &ve) {
		t.Fatalf("empty selection: %v", err)
	}
}

func TestAdvanceCaseFollowsStepsRecordedElsewhere(t *testing.T) {
	f := newCaseFixture(t, 1)
	f.positive(f.proto, "P1", 3)
	f.sync()
	ctx := context.Background()
	id := f.caseID("P1")
	// A recording cannot arrive for a case nobody has reached: refused, with
	// the allowed states named.
	var ve *cohort.ValidationError
	if _, err := f.s.AdvanceCase(ctx, cohort.System, id, followup.RecordingReceived, time.Time{}, ""); !errors.As(err, &ve) || !strings.Contains(ve.Fields["state"], "allowed next states") {
		t.Fatalf("advance from open: %v", err)
	}
	f.s.LogAttempt(ctx, f.coord, id, db.AttemptInput{Version: 1, Channel: "phone", Outcome: "reached"})
	f.s.RecordShipment(ctx, f.coord, id, 2, day(2026, 6, 1), "")
	// The version is 3, but a system step does not need it.
	back := fixedNow
	c, err := f.s.AdvanceCase(ctx, cohort.System, id, followup.RecordingReceived, back, "")
	if err != nil || c.State != followup.RecordingReceived || !c.RecordingBackAt.Equal(back) || c.Version != 4 {
		t.Fatalf("advance: %s %v v%d (%v)", c.State, c.RecordingBackAt, c.Version, err)
	}
	if c, err := f.s.AdvanceCase(ctx, cohort.System, id, followup.RecordingReceived, time.Time{}, ""); err != nil || c.Version != 4 {
		t.Fatalf("repeated advance changed the case: v%d (%v)", c.Version, err)
	}
	if n := f.count(`SELECT count(*) FROM audit_events WHERE action = 'case.advance'`); n != 1 {
		t.Fatalf("advance audit events %d, want 1", n)
	}
}
