package db_test

import (
	"context"
	"errors"
	"fmt"
	"slices"
	"sync"
	"sync/atomic"
	"testing"

	"cohortdesk/cohort"
	"cohortdesk/db"
)

func TestSyncCasesMergesEpisodesAndIsIdempotent(t *testing.T) {
	f := newCaseFixture(t, 4)
	// Default episode gap 2 (ours): weeks 1, 2 and 4 are one episode (one
	// negative week between 2 and 4); week 9 is 5 weeks later, a new one.
	f.positive(f.proto, "P1", 1, 2, 4, 9)
	f.positive(f.proto, "P2", 3)
	f.positive(f.proto, "P3", 6)
	mustExec(t, f.s, `UPDATE participants SET withdrawn_on = '2026-03-01', withdrawal_reason = 'moved' WHERE study_id = 'P3'`)

	if o, e := f.sync(); o != 3 || e != 0 {
		t.Fatalf("first sync opened %d, extended %d; want 3, 0", o, e)
	}
	if got, want := f.casesOf("P1"), []string{"1-4:open", "9-9:open"}; !slices.Equal(got, want) {
		t.Fatalf("P1 cases %v, want %v", got, want)
	}
	if got := f.casesOf("P3"); len(got) != 0 {
		t.Fatalf("withdrawn participant got cases %v", got)
	}
	// Re-running changes nothing: no new case, no new audit event.
	events := f.count(`SELECT count(*) FROM audit_events WHERE object_type = 'case'`)
	if o, e := f.sync(); o != 0 || e != 0 {
		t.Fatalf("second sync opened %d, extended %d; want 0, 0", o, e)
	}
	if got := f.count(`SELECT count(*) FROM audit_events WHERE object_type = 'case'`); got != events {
		t.Fatalf("re-run wrote %d audit events", got-events)
	}

	// A new positive week within the gap of a working case extends it.
	f.positive(f.proto, "P1", 11)
	if o, e := f.sync(f.pids["P1"]); o != 0 || e != 1 {
		t.Fatalf("extension: opened %d, extended %d; want 0, 1", o, e)
	}
	if got, want := f.casesOf("P1"), []string{"1-4:open", "9-11:open"}; !slices.Equal(got, want) {
		t.Fatalf("P1 cases after extension %v, want %v", got, want)
	}

	// A week near a closed case is recorded on it without reopening it; a
	// week beyond the gap opens a new case.
	p2 := f.caseID("P2")
	if _, err := f.s.CloseCase(context.Background(), f.coord, p2, db.MoveInput{Version: 1, To: "closed_declined", Reason: "said no on the phone"}); err != nil {
		t.Fatal(err)
	}
	f.positive(f.proto, "P2", 4)
	if o, e := f.sync(); o != 0 || e != 0 {
		t.Fatalf("late week: opened %d, extended %d; want 0, 0", o, e)
	}
	if n := f.count(`SELECT count(*) FROM case_weeks WHERE case_id = $1 AND late`, p2); n != 1 {
		t.Fatalf("late weeks on the closed case: %d, want 1", n)
	}
	f.positive(f.proto, "P2", 20)
	if o, _ := f.sync(); o != 1 {
		t.Fatalf("week 20 opened %d cases, want 1", o)
	}
	if got, want := f.casesOf("P2"), []string{"3-3:closed_declined", "20-20:open"}; !slices.Equal(got, want) {
		t.Fatalf("P2 cases %v, want %v", got, want)
	}

	// A new protocol version flagging the same weeks joins the existing cases.
	var v2 int
	if err := f.s.Pool().QueryRow(context.Background(), `INSERT INTO protocols (name, version, params) VALUES ('standard', 2, '{}') RETURNING id`).Scan(&v2); err != nil {
		t.Fatal(err)
	}
	f.positive(v2, "P1", 2, 10)
	if o, e, err := f.s.SyncCases(context.Background(), cohort.System, v2, nil); err != nil || o != 0 || e != 2 {
		t.Fatalf("version 2: opened %d, extended %d (err %v); want 0, 2", o, e, err)
	}
	if n := f.count(`SELECT count(*) FROM audit_events WHERE action = 'case.open'`); n != 4 {
		t.Fatalf("case.open events %d, want one per opened case (4)", n)
	}
	if _, _, err := f.s.SyncCases(context.Background(), cohort.System, 9999, nil); !errors.Is(err, cohort.ErrNotFound) {
		t.Fatalf("unknown protocol: %v, want not found", err)
	}
}

func TestSyncCasesUsesTheStudyEpisodeGap(t *testing.T) {
	f := newCaseFixture(t, 1)
	saveSettings(t, f.s, func(in *db.StudySettings) { in.EpisodeGapWeeks = 1 })
	f.positive(f.proto, "P1", 1, 2, 4)
	if o, _ := f.sync(); o != 2 {
		t.Fatalf("gap 1: opened %d, want 2", o)
	}
	if got, want := f.casesOf("P1"), []string{"1-2:open", "4-4:open"}; !slices.Equal(got, want) {
		t.Fatalf("cases %v, want %v", got, want)
	}
}

func TestConcurrentSyncsOpenOneCase(t *testing.T) {
	f := newCaseFixture(t, 30)
	for i := 1; i <= 30; i++ {
		f.positive(f.proto, fmt.Sprint("P", i), 2, 3)
	}
	var wg sync.WaitGroup
	var opened atomic.Int64
	for range 4 {
		wg.Add(1)
		go func() {
			defer wg.Done()
			o, _, err := f.s.SyncCases(context.Background(), cohort.System, f.proto, nil)
			if err != nil {
				t.Error(err)
			}
			opened.Add(int64(o))
		}()
	}
	wg.Wait()
	if got := f.count(`SELECT count(*) FROM cases`); got != 30 || opened.Load() != 30 {
		t.Fatalf("%d cases, %d reported opened; want 30 and 30", got, opened.Load())
	}
}
