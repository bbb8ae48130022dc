package db_test

import (
	"cmp"
	"context"
	"errors"
	"fmt"
	"slices"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
	"cohortdesk/db"
)

func TestCaseListFiltersAndPages(t *testing.T) {
	f := newCaseFixture(t, 120)
	for i := 1; i <= 120; i++ {
		f.positive(f.proto, fmt.Sprint("P", i), i%9)
	}
	f.sync()
	ctx := context.Background()
	// Spread the deadlines so pages cross ties and unset deadlines.
	mustExec(t, f.s, `UPDATE cases SET due_at = CASE WHEN id % 10 = 0 THEN NULL ELSE $1::timestamptz + (id % 7) * interval '1 day' - interval '3 days' END`, fixedNow)
	seen := map[int64]bool{}
	var prev time.Time
	prevUnset := false
	filter := db.CaseFilter{Limit: 25}
	pages := 0
	for {
		page, err := f.s.Cases(ctx, filter)
		if err != nil {
			t.Fatal(err)
		}
		if page.Total != 120 {
			t.Fatalf("total %d", page.Total)
		}
		pages++
		for _, c := range page.Rows {
			if seen[c.ID] {
				t.Fatalf("case %d on two pages", c.ID)
			}
			seen[c.ID] = true
			switch {
			case c.DueAt.IsZero():
				prevUnset = true
			case prevUnset || c.DueAt.Before(prev):
				t.Fatalf("order broken at case %d", c.ID)
			default:
				prev = c.DueAt
			}
		}
		if page.Next == "" {
			break
		}
		filter.After = page.Next
	}
	if len(seen) != 120 || pages != 5 {
		t.Fatalf("saw %d cases on %d pages", len(seen), pages)
	}
	overdue := f.count(`SELECT count(*) FROM cases WHERE due_at <= $1`, fixedNow)
	if page, _ := f.s.Cases(ctx, db.CaseFilter{Overdue: true}); page.Total != int64(overdue) || overdue == 0 {
		t.Fatalf("overdue filter %d, want %d", page.Total, overdue)
	}
	if page, _ := f.s.Cases(ctx, db.CaseFilter{SiteID: 1}); page.Total != 60 {
		t.Fatalf("site filter %d, want 60", page.Total)
	}
	id := f.caseID("P7")
	if _, err := f.s.AssignCase(ctx, f.coord, id, 1, f.coord.UserID); err != nil {
		t.Fatal(err)
	}
	if page, _ := f.s.Cases(ctx, db.CaseFilter{OwnerID: f.coord.UserID}); page.Total != 1 || page.Rows[0].ID != id || page.Rows[0].Owner != "Staff coordinator" {
		t.Fatalf("owner filter: %+v", page)
	}
	if page, _ := f.s.Cases(ctx, db.CaseFilter{Unowned: true}); page.Total != 119 {
		t.Fatalf("unowned filter %d", page.Total)
	}
	if page, _ := f.s.Cases(ctx, db.CaseFilter{Scope: db.EndedCases}); page.Total != 0 {
		t.Fatalf("final filter %d", page.Total)
	}
	if page, _ := f.s.Cases(ctx, db.CaseFilter{State: followup.Open}); page.Total != 120 {
		t.Fatalf("state filter %d", page.Total)
	}
	if page, _ := f.s.Cases(ctx, db.CaseFilter{Scope: db.AllCases}); page.Total != 120 {
		t.Fatalf("all cases %d", page.Total)
	}
	if _, err := f.s.Cases(ctx, db.CaseFilter{State: "bogus"}); err == nil {
		t.Fatal("unknown state filter accepted")
	}
}

func TestTriageGroupsAndRecordingsWaiting(t *testing.T) {
	f := newCaseFixture(t, 4)
	for _, p := range []string{"P1", "P2", "P3", "P4"} {
		f.positive(f.proto, p, 2)
	}
	f.sync()
	ctx := context.Background()
	// P1 overdue, P2 due today (end of Monday 1 June), P3 new and unowned
	// (due later), P4 waiting for an over-read with one recording unread.
	mustExec(t, f.s, `UPDATE cases SET due_at = $2 WHERE participant_id = $1`, f.pids["P1"], fixedNow.Add(-time.Hour))
	mustExec(t, f.s, `UPDATE cases SET due_at = $2 WHERE participant_id = $1`, f.pids["P2"], time.Date(2026, 6, 2, 0, 0, 0, 0, time.UTC))
	p4 := f.caseID("P4")
	mustExec(t, f.s, `UPDATE cases SET state = 'recording_received', owner_id = $2, recording_back_at = $3, due_at = $4, reached_at = $3, recorder_sent_at = $3 WHERE id = $1`,
		p4, f.coord.UserID, fixedNow.Add(-48*time.Hour), fixedNow.Add(96*time.Hour))
	mustExec(t, f.s, `INSERT INTO recordings (case_id, participant_id, taken_at, duration_s) VALUES ($1, $2, $3, 30)`, p4, f.pids["P4"], fixedNow.Add(-50*time.Hour))
	tr, err := f.s.Triage(ctx, 0, 0)
	if err != nil {
		t.Fatal(err)
	}
	var order []string
	for _, r := range tr.Rows {
		order = append(order, fmt.Sprintf("%s:%d", r.StudyID, r.Bucket))
	}
	want := []string{"P1:1", "P2:2", "P3:3", "P4:4"}
	if !slices.Equal(order, want) {
		t.Fatalf("triage order %v, want %v", order, want)
	}
	if tr.UnreadRecordings != 1 || tr.Counts[followup.BucketOverdue] != 1 || tr.Counts[followup.BucketAwaitingOverRead] != 1 {
		t.Fatalf("counts %v, unread %d", tr.Counts, tr.UnreadRecordings)
	}
	// P3 taken on by the coordinator leaves "new flags" for the
	// coordinator's own group; for anyone else it is on schedule.
	mustExec(t, f.s, `UPDATE cases SET owner_id = $2 WHERE participant_id = $1`, f.pids["P3"], f.coord.UserID)
	mine, err := f.s.Triage(ctx, 0, f.coord.UserID)
	if err != nil {
		t.Fatal(err)
	}
	if mine.Counts[followup.BucketMine] != 1 || mine.Counts[followup.BucketNewUnowned] != 0 || mine.Rows[len(mine.Rows)-1].StudyID != "P3" {
		t.Errorf("the coordinator's triage: counts %v", mine.Counts)
	}
	if other, _ := f.s.Triage(ctx, 0, f.inv.UserID); other.Counts[followup.BucketOther] != 1 || other.Counts[followup.BucketMine] != 0 {
		t.Errorf("another person's triage: counts %v", other.Counts)
	}
	if one, _ := f.s.TriageCase(ctx, f.caseID("P3"), f.coord.UserID); one.Rows[0].Bucket != followup.BucketMine {
		t.Errorf("one case in its owner's triage: %v", one.Rows[0].Bucket)
	}
	one, err := f.s.TriageCase(ctx, p4, 0)
	if err != nil || len(one.Rows) != 1 || one.Rows[0].UnreadRecordings != 1 {
		t.Fatalf("triage of one case: %+v %v", one.Rows, err)
	}
	if _, err := f.s.TriageCase(ctx, 999999, 0); !errors.Is(err, cohort.ErrNotFound) {
		t.Fatalf("unknown case: %v", err)
	}
	weeks, err := f.s.FlaggedWeeks(ctx, f.pids["P4"])
	if err != nil || len(weeks) != 1 || weeks[0].CaseID != p4 {
		t.Fatalf("flagged weeks %+v %v", weeks, err)
	}
	if got := fmt.Sprint(weeks[0].Metrics); got != "[{irregular_share 0.42} {windows.usable 120}]" {
		t.Fatalf("metrics %s", got)
	}
}

// TestCaseListSortsAndSearches pages through the case list in every order
// its column headers offer, both ways, a few cases a page: every case once,
// in the order asked for (ties broken by id); and the search finds cases by
// any part of the participant's study ID.
func TestCaseListSortsAndSearches(t *testing.T) {
	f := newCaseFixture(t, 30)
	for i := 1; i <= 30; i++ {
		f.positive(f.proto, fmt.Sprint("P", i), i%5)
	}
	f.sync()
	ctx := context.Background()
	mustExec(t, f.s, `UPDATE cases SET flagged_at = $1::timestamptz - (id % 6) * interval '1 day',
		due_at = CASE WHEN id % 7 = 0 THEN NULL ELSE $1::timestamptz + (id % 4) * interval '1 day' END`, fixedNow)
	key := map[string]func(db.Case) string{
		"due": func(c db.Case) string {
			if c.DueAt.IsZero() {
				return "~"
			}
			return c.DueAt.UTC().Format(time.RFC3339)
		},
		"flagged":  func(c db.Case) string { return c.FlaggedAt.UTC().Format(time.RFC3339) },
		"study_id": func(c db.Case) string { return c.StudyID },
	}
	for sort, k := range key {
		for _, desc := range []bool{false, true} {
			filter := db.CaseFilter{Scope: db.AllCases, Sort: sort, Desc: desc, Limit: 4}
			var got []db.Case
			for {
				page, err := f.s.Cases(ctx, filter)
				if err != nil {
					t.Fatal(err)
				}
				got = append(got, page.Rows...)
				if page.Next == "" {
					break
				}
				filter.After = page.Next
			}
			if len(got) != 30 {
				t.Fatalf("%s desc=%v: %d cases over the pages, want 30", sort, desc, len(got))
			}
			sorted := slices.IsSortedFunc(got, func(a, b db.Case) int {
				c := strings.Compare(k(a), k(b))
				if c == 0 {
					c = cmp.Compare(a.ID, b.ID)
				}
				if desc {
					c = -c
				}
				return c
			})
			if !sorted {
				t.Errorf("%s desc=%v: pages out of order", sort, desc)
			}
		}
	}
	for q, want := range map[string]int{"p1": 11, "P-1": 11, "1": 12, "p30": 1, "30": 1, "x": 0} {
		page, err := f.s.Cases(ctx, db.CaseFilter{Scope: db.AllCases, Search: q})
		if err != nil {
			t.Fatal(err)
		}
		if int(page.Total) != want {
			t.Errorf("search %q: %d cases, want %d", q, page.Total, want)
		}
	}
}
