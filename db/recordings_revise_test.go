package db_test

import (
	"context"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort/ecg"
	"cohortdesk/cohort/followup"
	"cohortdesk/cohort/overread"
	"cohortdesk/db"
)

// TestOverReadCorrections (issue 19, finding 5): a reader amends their
// reading and later withdraws it, each with a reason. The earlier readings
// are kept as they were, the conclusion and the case follow the current
// readings (over-read after the amendment, back to "recording received"
// after the withdrawal, into the over-read queue again), the audit trail has
// both, and nobody else may correct the reading.
func TestOverReadCorrections(t *testing.T) {
	f, cases, second := newRecordingFixture(t, 1)
	ctx := context.Background()
	f.clock.set(fixedNow.Add(48 * time.Hour))
	rec, err := f.s.AddRecording(ctx, f.coord, cases["P1"], ecg.RecordingInput{TakenAt: fixedNow.Add(time.Hour), DurationS: 45, Auto: overread.AutoSuggestsAF})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := f.s.AddOverRead(ctx, f.inv, rec.ID, db.OverReadInput{Role: "first", Rhythm: "sinus", Confidence: "certain", ReaderID: f.inv.UserID}); err != nil {
		t.Fatal(err)
	}
	if c := f.get(cases["P1"]); c.State != followup.OverRead {
		t.Fatalf("case %s after the reading", c.State)
	}
	amend := db.RevisionInput{Role: "first", Change: overread.Amended, Rhythm: "af", Confidence: "probable", Reason: "chose the wrong rhythm"}
	_, err = f.s.ReviseOverRead(ctx, second, rec.ID, amend)
	fieldMsg(t, err, "reader")
	rec, err = f.s.ReviseOverRead(ctx, f.inv, rec.ID, amend)
	if err != nil {
		t.Fatal(err)
	}
	if rec.Conclusion.Rhythm != overread.AF || len(rec.Readings) != 1 || rec.Readings[0].Confidence != overread.Probable {
		t.Fatalf("after the amendment: %+v, %+v", rec.Conclusion, rec.Readings)
	}
	if len(rec.Revisions) != 1 || rec.Revisions[0].Rhythm != overread.Sinus || rec.Revisions[0].Change != overread.Amended ||
		rec.Revisions[0].Reason != "chose the wrong rhythm" || !strings.Contains(rec.Revisions[0].ChangedBy, "Staff investigator") {
		t.Fatalf("the earlier reading is not kept as it was: %+v", rec.Revisions)
	}
	ready, _ := f.s.ReadyToRefer(ctx)
	if len(ready) != 1 {
		t.Errorf("the amended AF reading does not make the case ready to refer: %v", ready)
	}

	rec, err = f.s.ReviseOverRead(ctx, f.inv, rec.ID, db.RevisionInput{Role: "first", Change: overread.Withdrawn, Reason: "this was another participant's strip"})
	if err != nil {
		t.Fatal(err)
	}
	if rec.Conclusion.Status != overread.Unread || len(rec.Readings) != 0 || len(rec.Revisions) != 2 || rec.Revisions[1].Rhythm != overread.AF {
		t.Fatalf("after the withdrawal: %+v, %d readings, %+v", rec.Conclusion, len(rec.Readings), rec.Revisions)
	}
	c := f.get(cases["P1"])
	if c.State != followup.RecordingReceived || !c.OverReadAt.IsZero() || c.UnreadRecordings != 1 {
		t.Errorf("case after the withdrawal: %s, over-read at %v, %d waiting", c.State, c.OverReadAt, c.UnreadRecordings)
	}
	if n, _ := f.s.RecordingsAwaitingRead(ctx); n != 1 {
		t.Errorf("%d recordings wait for an over-read after the withdrawal, want 1", n)
	}
	var actions []string
	rows, _ := f.s.Pool().Query(ctx, `SELECT action FROM audit_events WHERE object_type = 'recording' AND object_id = $1 ORDER BY id`, itoa(rec.ID))
	for rows.Next() {
		var a string
		rows.Scan(&a)
		actions = append(actions, a)
	}
	rows.Close()
	if got := strings.Join(actions, " "); got != "recording.add over_read.add over_read.amend over_read.withdraw" {
		t.Errorf("audit trail %q", got)
	}
	// A new first reading may follow; nothing is left to withdraw twice.
	_, err = f.s.ReviseOverRead(ctx, f.inv, rec.ID, db.RevisionInput{Role: "first", Change: overread.Withdrawn, Reason: "again"})
	fieldMsg(t, err, "role")
	if _, err := f.s.AddOverRead(ctx, second, rec.ID, db.OverReadInput{Role: "first", Rhythm: "sinus", Confidence: "certain", ReaderID: second.UserID}); err != nil {
		t.Fatal(err)
	}
	// A case that ended keeps its readings.
	c = f.get(cases["P1"])
	if _, err := f.s.CloseCase(ctx, f.coord, c.ID, db.MoveInput{Version: c.Version, To: followup.ClosedNotConfirmed, Reason: "sinus rhythm"}); err != nil {
		t.Fatal(err)
	}
	_, err = f.s.ReviseOverRead(ctx, second, rec.ID, db.RevisionInput{Role: "first", Change: overread.Withdrawn, Reason: "late"})
	if msg := fieldMsg(t, err, "role"); !strings.Contains(msg, "the case has ended") {
		t.Errorf("a correction on an ended case: %q", msg)
	}
}

// TestRecordingMarkedNotNeeded (issue 19, finding 2): a recording waiting for
// an over-read can be marked as needing none, with a reason, audited; it
// then leaves the queue and its counts. A read recording cannot be marked,
// nor one marked already.
func TestRecordingMarkedNotNeeded(t *testing.T) {
	f, cases, _ := newRecordingFixture(t, 1)
	ctx := context.Background()
	f.clock.set(fixedNow.Add(48 * time.Hour))
	short, err := f.s.AddRecording(ctx, f.coord, cases["P1"], ecg.RecordingInput{TakenAt: fixedNow.Add(time.Hour), DurationS: 12, Auto: overread.AutoNotAnalysed})
	if err != nil {
		t.Fatal(err)
	}
	repeat, err := f.s.AddRecording(ctx, f.coord, cases["P1"], ecg.RecordingInput{TakenAt: fixedNow.Add(2 * time.Hour), DurationS: 40, Auto: overread.AutoSuggestsAF})
	if err != nil {
		t.Fatal(err)
	}
	fieldMsg(t, f.s.MarkReadNotNeeded(ctx, f.inv, short.ID, "  "), "not_needed_reason")
	if err := f.s.MarkReadNotNeeded(ctx, f.inv, short.ID, "too short; the repeat is read instead"); err != nil {
		t.Fatal(err)
	}
	q, err := f.s.Confirmations(ctx, 10)
	if err != nil || q.UnreadCount != 1 || len(q.Unread) != 1 || q.Unread[0].ID != repeat.ID {
		t.Fatalf("queue after the mark: %d, %+v (%v)", q.UnreadCount, q.Unread, err)
	}
	if c := f.get(cases["P1"]); c.UnreadRecordings != 1 || c.FirstUnread != repeat.ID {
		t.Errorf("the case counts %d waiting, first %d", c.UnreadRecordings, c.FirstUnread)
	}
	rec, _ := f.s.Recording(ctx, short.ID)
	if rec.NotNeeded != "too short; the repeat is read instead" || rec.NotNeededAt.IsZero() || !strings.Contains(rec.NotNeededBy, "investigator") {
		t.Errorf("the mark is not kept: %+v", rec)
	}
	var audited int
	f.s.Pool().QueryRow(ctx, `SELECT count(*) FROM audit_events WHERE action = 'recording.read_not_needed' AND object_id = $1`, itoa(short.ID)).Scan(&audited)
	if audited != 1 {
		t.Errorf("%d audit events for the mark", audited)
	}
	if err := f.s.MarkReadNotNeeded(ctx, f.inv, short.ID, "again"); err == nil {
		t.Error("a second mark is taken")
	}
	if _, err := f.s.AddOverRead(ctx, f.inv, repeat.ID, db.OverReadInput{Role: "first", Rhythm: "af", Confidence: "certain", ReaderID: f.inv.UserID}); err != nil {
		t.Fatal(err)
	}
	fieldMsg(t, f.s.MarkReadNotNeeded(ctx, f.inv, repeat.ID, "read already"), "not_needed_reason")
}
