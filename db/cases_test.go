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
	saveSettings(t, f.s, func(in *db.StudySettingsInput) { in.EpisodeGapWeeks = "1" })
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

// saveSettings stores valid settings changed by edit.
func saveSettings(t *testing.T, s *db.Store, edit func(*db.StudySettingsInput)) db.StudySettings {
	t.Helper()
	in := db.StudySettingsInput{Name: "Heart rhythm study", TimeZone: "UTC", EnrolmentTarget: "1000",
		FirstContactWorkingDays: "2", MaxAttempts: "5", GiveUpAfterDays: "14", RecorderSendWithinDays: "5",
		RecordingBackWithinDays: "14", OverReadWithinDays: "7", ReferOrCloseWithinDays: "3", EpisodeGapWeeks: "2"}
	if edit != nil {
		edit(&in)
	}
	st, err := s.SaveStudySettings(context.Background(), cohort.Actor{UserID: 0, Name: "admin test"}, in)
	if err != nil {
		t.Fatalf("save settings: %v", err)
	}
	return st
}

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

func TestDueDatesCountWorkingDaysInTheStudyZone(t *testing.T) {
	for _, c := range []struct {
		name    string
		now     time.Time
		closure string
		want    time.Time
	}{
		{
			// 2026-07-02 is a Thursday and Chicago is on UTC-5 (CDT) in July
			// (verified: GNU date with the IANA time zone database). The flag is
			// Thursday evening in Chicago but already Friday in UTC. With Monday
			// 6 July a closure day, two working days after Thursday are Friday 3
			// and Tuesday 7 July, so the case is due by the end of Tuesday, local
			// midnight = 2026-07-08 05:00 UTC (computed by hand from the counting
			// rule of followup.Calendar.AddWorkingDays, which is ours). Counting
			// from the UTC day (Friday) would give the end of Wednesday instead.
			name: "zone and closure day", now: time.Date(2026, 7, 3, 1, 0, 0, 0, time.UTC), closure: "2026-07-06",
			want: time.Date(2026, 7, 8, 5, 0, 0, 0, time.UTC),
		},
		{
			// 2026-03-06 is a Friday and US daylight saving time starts on
			// Sunday 8 March 2026, the second Sunday of March (verified: GNU date
			// with the IANA time zone database). Flag Friday 10:00 CST; two
			// working days: Monday 9 and Tuesday 10 March, due at local midnight
			// after Tuesday, which is in CDT: 2026-03-11 05:00 UTC (computed by
			// hand, as above).
			name: "daylight saving starts", now: time.Date(2026, 3, 6, 16, 0, 0, 0, time.UTC),
			want: time.Date(2026, 3, 11, 5, 0, 0, 0, time.UTC),
		},
	} {
		t.Run(c.name, func(t *testing.T) {
			f := newCaseFixture(t, 1)
			f.clock.set(c.now)
			saveSettings(t, f.s, func(in *db.StudySettingsInput) { in.TimeZone = "America/Chicago"; in.ClosureDays = c.closure })
			f.positive(f.proto, "P1", 3)
			f.sync()
			got := f.get(f.caseID("P1"))
			if !got.DueAt.Equal(c.want) || got.NextAction != followup.ActionFirstContact {
				t.Fatalf("due %v (%s), want %v", got.DueAt.UTC(), got.NextAction, c.want)
			}
		})
	}
}

func TestSettingsChangeReschedulesOpenCases(t *testing.T) {
	f := newCaseFixture(t, 2)
	f.positive(f.proto, "P1", 3)
	f.sync()
	id := f.caseID("P1")
	before := f.get(id).DueAt
	// fixedNow is Monday 2026-06-01 12:00 UTC (verified: GNU date): 2 working
	// days -> end of Wednesday 3 June (computed by hand from the counting rule,
	// which is ours).
	if want := time.Date(2026, 6, 4, 0, 0, 0, 0, time.UTC); !before.Equal(want) {
		t.Fatalf("due %v, want %v", before, want)
	}
	saveSettings(t, f.s, func(in *db.StudySettingsInput) { in.FirstContactWorkingDays = "4" })
	// Four working days after Monday: Tue, Wed, Thu, Fri -> end of Friday 5 June
	// (computed by hand).
	if got, want := f.get(id).DueAt, time.Date(2026, 6, 6, 0, 0, 0, 0, time.UTC); !got.Equal(want) {
		t.Fatalf("after the settings change due %v, want %v", got, want)
	}
	if f.get(id).Version != 1 {
		t.Fatal("rescheduling changed the case version")
	}
	var n int
	f.s.Pool().QueryRow(context.Background(), `SELECT (new_value->>'cases_rescheduled')::int FROM audit_events WHERE action = 'study.update' ORDER BY id DESC LIMIT 1`).Scan(&n)
	if n != 1 {
		t.Fatalf("audited %d rescheduled cases, want 1", n)
	}
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
	if _, err := f.s.RecordShipment(ctx, f.coord, id, v, "2026-06-02", "TRK1"); !errors.As(err, &ve) || ve.Fields["sent_on"] == "" {
		t.Fatalf("future shipment date: %v", err)
	}
	if _, err := f.s.RecordShipment(ctx, f.coord, id, v, "2026-05-31", "TRK1"); !errors.As(err, &ve) || ve.Fields["sent_on"] == "" {
		t.Fatalf("shipment before reaching: %v", err)
	}
	c = step("shipped", func(v int) (db.Case, error) { return f.s.RecordShipment(ctx, f.coord, id, v, "2026-06-01", "TRK-0042") })
	// Sent Monday 1 June; the recording is due back 14 calendar days later,
	// Monday 15 June, by its end (computed by hand; the 14 days are our
	// illustrative default).
	if c.State != followup.RecorderSent || c.TrackingNumber != "TRK-0042" || !c.DueAt.Equal(time.Date(2026, 6, 16, 0, 0, 0, 0, time.UTC)) {
		t.Fatalf("after shipping: %s %q due %v", c.State, c.TrackingNumber, c.DueAt)
	}
	f.clock.set(fixedNow.Add(72 * time.Hour))
	c = step("back", func(v int) (db.Case, error) { return f.s.RecordReturn(ctx, f.coord, id, v, "2026-06-04") })
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
	if page, _ := f.s.Cases(ctx, db.CaseFilter{State: "final"}); page.Total != 0 {
		t.Fatalf("final filter %d", page.Total)
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
	tr, err := f.s.Triage(ctx, 0)
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
	one, err := f.s.TriageCase(ctx, p4)
	if err != nil || len(one.Rows) != 1 || one.Rows[0].UnreadRecordings != 1 {
		t.Fatalf("triage of one case: %+v %v", one.Rows, err)
	}
	if _, err := f.s.TriageCase(ctx, 999999); !errors.Is(err, cohort.ErrNotFound) {
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
	f.s.RecordShipment(ctx, f.coord, id, 2, "2026-06-01", "")
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
