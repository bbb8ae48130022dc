package db_test

import (
	"context"
	"fmt"
	"sync"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
	"cohortdesk/db"
	"cohortdesk/db/dbtest"
)

// clock is a settable test clock, safe for concurrent readers.
type clock struct {
	mu sync.Mutex
	t  time.Time
}

func (c *clock) now() time.Time  { c.mu.Lock(); defer c.mu.Unlock(); return c.t }
func (c *clock) set(t time.Time) { c.mu.Lock(); c.t = t; c.mu.Unlock() }

// caseFixture is a store with a site, a protocol and participants P1..Pn, and
// one account per case-working role.
type caseFixture struct {
	t     *testing.T
	s     *db.Store
	clock *clock
	proto int
	pids  map[string]int64
	coord cohort.Actor
	inv   cohort.Actor
}

func newCaseFixture(t *testing.T, n int) *caseFixture {
	t.Helper()
	clk := &clock{t: fixedNow}
	s := db.New(dbtest.Pool(t), clk.now)
	f := &caseFixture{t: t, s: s, clock: clk, pids: map[string]int64{}}
	mustExec(t, s, `INSERT INTO sites (code, name) VALUES ('AA', 'Site A'), ('BB', 'Site B')`)
	mustExec(t, s, `INSERT INTO participants (study_id, site_id, time_zone, enrolled_on)
		SELECT 'P' || g, 1 + (g - 1) % 2, 'UTC', date '2026-01-05' FROM generate_series(1, $1) g`, n)
	ctx := context.Background()
	rows, err := s.Pool().Query(ctx, `SELECT study_id, id FROM participants`)
	if err != nil {
		t.Fatal(err)
	}
	for rows.Next() {
		var sid string
		var id int64
		if err := rows.Scan(&sid, &id); err != nil {
			t.Fatal(err)
		}
		f.pids[sid] = id
	}
	if err := s.Pool().QueryRow(ctx, `INSERT INTO protocols (name, version, params, active) VALUES ('standard', 1, '{}', true) RETURNING id`).Scan(&f.proto); err != nil {
		t.Fatal(err)
	}
	for _, r := range []cohort.Role{cohort.Coordinator, cohort.Investigator, cohort.Monitor} {
		u, err := s.CreateUser(ctx, cohort.System, db.NewUser{Email: string(r) + "@example.org", Name: "Staff " + string(r), Role: r, PasswordHash: "x"})
		if err != nil {
			t.Fatal(err)
		}
		switch r {
		case cohort.Coordinator:
			f.coord = u.Actor("127.0.0.1", "test")
		case cohort.Investigator:
			f.inv = u.Actor("127.0.0.1", "test")
		}
	}
	return f
}

// positive records screen results for a participant: the listed weeks
// positive under protocol proto.
func (f *caseFixture) positive(proto int, studyID string, weeks ...int) {
	f.t.Helper()
	for _, w := range weeks {
		mustExec(f.t, f.s, `INSERT INTO screen_results (participant_id, protocol_id, week, verdict, reason, result, input_digest, wear_hours)
			VALUES ($1, $2, $3, 'positive', 'irregular share above the limit', '{"irregular_share": 0.42, "windows": {"usable": 120}}', 'd', 101.5)`,
			f.pids[studyID], proto, w)
	}
}

func (f *caseFixture) sync(ids ...int64) (int, int) {
	f.t.Helper()
	var list []int64
	if len(ids) > 0 {
		list = ids
	}
	o, e, err := f.s.SyncCases(context.Background(), cohort.System, f.proto, list)
	if err != nil {
		f.t.Fatalf("sync: %v", err)
	}
	return o, e
}

// casesOf lists a participant's cases as "first-last:state" by first week.
func (f *caseFixture) casesOf(studyID string) []string {
	f.t.Helper()
	rows, err := f.s.Pool().Query(context.Background(), `SELECT first_week, last_week, state FROM cases WHERE participant_id = $1 ORDER BY first_week, id`, f.pids[studyID])
	if err != nil {
		f.t.Fatal(err)
	}
	var out []string
	for rows.Next() {
		var a, b int
		var st string
		if err := rows.Scan(&a, &b, &st); err != nil {
			f.t.Fatal(err)
		}
		out = append(out, fmt.Sprintf("%d-%d:%s", a, b, st))
	}
	return out
}

func (f *caseFixture) caseID(studyID string) int64 {
	f.t.Helper()
	var id int64
	if err := f.s.Pool().QueryRow(context.Background(), `SELECT id FROM cases WHERE participant_id = $1 ORDER BY id DESC LIMIT 1`, f.pids[studyID]).Scan(&id); err != nil {
		f.t.Fatalf("case of %s: %v", studyID, err)
	}
	return id
}

func (f *caseFixture) get(id int64) db.Case {
	f.t.Helper()
	c, err := f.s.Case(context.Background(), id)
	if err != nil {
		f.t.Fatal(err)
	}
	return c
}

func (f *caseFixture) count(sql string, args ...any) int {
	f.t.Helper()
	var n int
	if err := f.s.Pool().QueryRow(context.Background(), sql, args...).Scan(&n); err != nil {
		f.t.Fatalf("%s: %v", sql, err)
	}
	return n
}

// saveSettings stores valid settings changed by edit.
func saveSettings(t *testing.T, s *db.Store, edit func(*db.StudySettings)) db.StudySettings {
	t.Helper()
	in := followup.DefaultStudySettings()
	in.Name, in.EnrolmentTarget = "Heart rhythm study", 1000
	if edit != nil {
		edit(&in)
	}
	st, _, err := s.SaveStudySettings(context.Background(), cohort.Actor{UserID: 0, Name: "admin test"}, in)
	if err != nil {
		t.Fatalf("save settings: %v", err)
	}
	return st
}

// day is a calendar day for the tests.
func day(y int, m time.Month, d int) cohort.Date { return cohort.Date{Year: y, Month: m, Day: d} }
