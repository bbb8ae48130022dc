package db_test

import (
	"context"
	"slices"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/overread"
	"cohortdesk/db"
	"cohortdesk/db/dbtest"
)

// TestParticipantStatusSQLIsTheRule: the store's SQL for a participant's
// status gives cohort.StatusOf's answer around each of its edges: the day
// follow-up ends, an open-ended study, a withdrawal (issue 19, finding 2:
// "completed" participants were counted as active on the start page).
func TestParticipantStatusSQLIsTheRule(t *testing.T) {
	s := db.New(dbtest.Pool(t), nil)
	ctx := context.Background()
	enrolled := cohort.Date{Year: 2026, Month: 1, Day: 5}
	out := cohort.Date{Year: 2026, Month: 2, Day: 1}
	for _, weeks := range []int{0, 1, 12} {
		for _, days := range []int{-1, 0, 6, 7, 83, 84, 85, 400} {
			for _, withdrawn := range []*cohort.Date{nil, &out} {
				today := enrolled.AddDays(days)
				var wd *time.Time
				if withdrawn != nil {
					t := withdrawn.In(time.UTC)
					wd = &t
				}
				var got string
				err := s.Pool().QueryRow(ctx, `SELECT `+db.ParticipantStatusSQL("$1", "$2")+` FROM (SELECT $3::date AS enrolled_on, $4::date AS withdrawn_on) p`,
					today.String(), weeks, enrolled.String(), wd).Scan(&got)
				if err != nil {
					t.Fatal(err)
				}
				if want := cohort.StatusOf(enrolled, withdrawn, weeks, today); got != string(want) {
					t.Errorf("%d weeks, day %d, withdrawn %v: SQL %s, rule %s", weeks, days, withdrawn != nil, got, want)
				}
			}
		}
	}
}

// TestAwaitingReadSQLIsTheRule: the recordings the store counts and lists
// as waiting for an over-read are those overread.Awaits names, over every
// combination of a reading, a case still worked or ended, and a mark of no
// read needed; the queue, its count, the start page's count and the case's
// own count all agree (issue 19, finding 2: recordings on closed cases
// stayed in the queue for ever).
func TestAwaitingReadSQLIsTheRule(t *testing.T) {
	now := time.Date(2026, 6, 1, 12, 0, 0, 0, time.UTC)
	s := db.New(dbtest.Pool(t), func() time.Time { return now })
	ctx := context.Background()
	exec := func(sql string, args ...any) {
		t.Helper()
		if _, err := s.Pool().Exec(ctx, sql, args...); err != nil {
			t.Fatalf("%s: %v", sql, err)
		}
	}
	exec(`INSERT INTO sites (code, name) VALUES ('AA', 'Site A')`)
	exec(`INSERT INTO participants (study_id, site_id, time_zone, enrolled_on) VALUES ('P1', 1, 'UTC', date '2026-01-05')`)
	exec(`INSERT INTO protocols (name, version, params, active) VALUES ('standard', 1, '{}', true)`)
	type rec struct {
		ended, read, notNeeded bool
	}
	var want []int64
	recs := map[int64]rec{}
	for _, ended := range []bool{false, true} {
		state, closed := "recording_received", any(nil)
		if ended {
			state, closed = "closed_declined", now
		}
		var caseID int64
		if err := s.Pool().QueryRow(ctx, `INSERT INTO cases (participant_id, protocol_id, first_week, last_week, state, flagged_at, closed_at, closing_note)
			VALUES (1, 1, 2, 2, $1, $2, $3, 'x') RETURNING id`, state, now.Add(-240*time.Hour), closed).Scan(&caseID); err != nil {
			t.Fatal(err)
		}
		for _, read := range []bool{false, true} {
			for _, notNeeded := range []bool{false, true} {
				if read && notNeeded {
					continue // a read recording is never marked
				}
				var id int64
				if err := s.Pool().QueryRow(ctx, `INSERT INTO recordings (case_id, participant_id, taken_at, duration_s) VALUES ($1, 1, $2, 40) RETURNING id`,
					caseID, now.Add(-100*time.Hour)).Scan(&id); err != nil {
					t.Fatal(err)
				}
				if read {
					exec(`INSERT INTO over_reads (recording_id, case_id, participant_id, role, rhythm, reader, read_on) VALUES ($1, $2, 1, 'first', 'sinus', 'R', date '2026-05-30')`, id, caseID)
				}
				if notNeeded {
					exec(`UPDATE recordings SET read_not_needed_reason = 'a repeat replaced it', read_not_needed_by = 'R', read_not_needed_at = $2 WHERE id = $1`, id, now)
				}
				recs[id] = rec{ended, read, notNeeded}
				c := overread.Conclusion{Status: overread.Unread}
				if read {
					c = overread.Conclusion{Status: overread.Single, Final: true, Rhythm: overread.Sinus}
				}
				if overread.Awaits(c, ended, notNeeded) {
					want = append(want, id)
				}
			}
		}
	}
	rows, err := s.Pool().Query(ctx, `SELECT r.id FROM recordings r JOIN cases c ON c.id = r.case_id WHERE `+db.AwaitingReadSQL+` ORDER BY r.id`)
	if err != nil {
		t.Fatal(err)
	}
	var got []int64
	for rows.Next() {
		var id int64
		rows.Scan(&id)
		got = append(got, id)
	}
	rows.Close()
	if !slices.Equal(got, want) || len(want) != 1 {
		t.Fatalf("SQL selects %v, the rule %v (recordings %v)", got, want, recs)
	}
	// The rows were written by bare SQL, outside the store's transactions:
	// the start page's kept count takes them in at the background pass.
	drainFigures(t, s)
	n, err := s.RecordingsAwaitingRead(ctx)
	q, qerr := s.Confirmations(ctx, 10)
	counts, cerr := s.Counts(ctx)
	c, caseErr := s.Case(ctx, 1)
	if err != nil || qerr != nil || cerr != nil || caseErr != nil {
		t.Fatal(err, qerr, cerr, caseErr)
	}
	queue := make([]int64, len(q.Unread))
	for i, r := range q.Unread {
		queue[i] = r.ID
	}
	if n != 1 || q.UnreadCount != 1 || !slices.Equal(queue, want) || counts.AwaitingRead != 1 || c.UnreadRecordings != 1 || c.FirstUnread != want[0] {
		t.Errorf("count %d, queue %v (%d), start page %d, case %d (first %d); want %v everywhere", n, queue, q.UnreadCount, counts.AwaitingRead,
			c.UnreadRecordings, c.FirstUnread, want)
	}
	if next, ok, err := s.NextAwaitingRead(ctx, want[0]); err != nil || ok {
		t.Errorf("next after the only one waiting: %d %v %v", next, ok, err)
	}
	if next, ok, _ := s.NextAwaitingRead(ctx, 0); !ok || next != want[0] {
		t.Errorf("next: %d %v, want %d", next, ok, want[0])
	}
}
