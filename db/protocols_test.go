package db_test

import (
	"context"
	"errors"
	"strings"
	"sync"
	"testing"

	"cohortdesk/cohort"
	"cohortdesk/cohort/screen"
	"cohortdesk/db"
)

var admin = cohort.Actor{UserID: 0, Name: "test admin", Role: cohort.Admin}

func countAudit(t *testing.T, s *db.Store, action string) int {
	t.Helper()
	var n int
	if err := s.Pool().QueryRow(context.Background(), `SELECT count(*) FROM audit_events WHERE action = $1`, action).Scan(&n); err != nil {
		t.Fatal(err)
	}
	return n
}

func mustDefault(t *testing.T, s *db.Store) db.ProtocolVersion {
	t.Helper()
	p, err := s.EnsureDefaultProtocol(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	return p
}

func TestEnsureDefaultProtocolIsIdempotentAndConcurrent(t *testing.T) {
	s := newStore(t)
	ctx := context.Background()
	var wg sync.WaitGroup
	errs := make(chan error, 4)
	for range 4 {
		wg.Go(func() {
			if _, err := s.EnsureDefaultProtocol(ctx); err != nil {
				errs <- err
			}
		})
	}
	wg.Wait()
	close(errs)
	for err := range errs {
		t.Fatal(err)
	}
	p := mustDefault(t, s)
	if p.Name != db.DefaultProtocolName || p.Version != 1 || !p.Active || p.Used {
		t.Fatalf("default protocol %+v, want standard v1 active and unused", p)
	}
	if d := p.Params.Diff(screen.DefaultProtocol()); len(d) != 0 {
		t.Fatalf("stored defaults differ from screen.DefaultProtocol: %v", d)
	}
	all, err := s.Protocols(ctx)
	if err != nil || len(all) != 1 {
		t.Fatalf("%d protocols (err %v), want 1", len(all), err)
	}
	if got := countAudit(t, s, "protocol.create"); got != 1 {
		t.Fatalf("protocol.create audited %d times, want 1", got)
	}
	// An administrator's choice of active version survives a restart.
	v2 := newVersion(t, s, p.ID, func(q *screen.Protocol) { q.MinWearHours = 30 })
	if _, err := s.ActivateProtocol(ctx, admin, v2.ID); err != nil {
		t.Fatal(err)
	}
	if got := mustDefault(t, s); got.ID != v2.ID {
		t.Fatalf("after restart the active version is %s, want %s", got.Label(), v2.Label())
	}
}

func newVersion(t *testing.T, s *db.Store, base int, edit func(*screen.Protocol)) db.ProtocolVersion {
	t.Helper()
	b, err := s.Protocol(context.Background(), base)
	if err != nil {
		t.Fatal(err)
	}
	q := b.Params
	q.Windows = append([]screen.WindowRule(nil), q.Windows...)
	edit(&q)
	v, err := s.CreateProtocolVersion(context.Background(), admin, db.NewProtocolVersion{BasedOn: base, Params: q, Note: "test change"})
	if err != nil {
		t.Fatal(err)
	}
	return v
}

func TestCreateProtocolVersionValidatesAndAudits(t *testing.T) {
	s := newStore(t)
	ctx := context.Background()
	v1 := mustDefault(t, s)

	bad := v1.Params
	bad.Windows = append([]screen.WindowRule(nil), bad.Windows...)
	bad.Windows[0].MASDThreshold = -3
	bad.MinWearHours = -1
	_, err := s.CreateProtocolVersion(ctx, admin, db.NewProtocolVersion{BasedOn: v1.ID, Params: bad})
	var ve *cohort.ValidationError
	if !errors.As(err, &ve) {
		t.Fatalf("err %v, want a validation error", err)
	}
	for _, f := range []string{"windows[0].masd_threshold", "min_wear_hours", "note"} {
		if ve.Fields[f] == "" {
			t.Errorf("no message for %s in %v", f, ve.Fields)
		}
	}
	_, err = s.CreateProtocolVersion(ctx, admin, db.NewProtocolVersion{BasedOn: v1.ID, Params: v1.Params, Note: "no change"})
	if !errors.As(err, &ve) || !strings.Contains(ve.Fields["form"], "nothing differs") {
		t.Fatalf("identical version: err %v", err)
	}
	_, err = s.CreateProtocolVersion(ctx, admin, db.NewProtocolVersion{BasedOn: 9999, Params: v1.Params, Note: "x"})
	if !errors.Is(err, cohort.ErrNotFound) {
		t.Fatalf("unknown base: err %v, want not found", err)
	}

	v2 := newVersion(t, s, v1.ID, func(q *screen.Protocol) { q.Windows[0].MASDThreshold = 9.5 })
	v3 := newVersion(t, s, v1.ID, func(q *screen.Protocol) { q.Windows[1].RunLength = 5 })
	if v2.Version != 2 || v3.Version != 3 || v2.BasedOn != v1.ID || v2.Active || v2.Used {
		t.Fatalf("versions: v2 %+v v3 %+v", v2, v3)
	}
	diff := v1.Params.Diff(v2.Params)
	if len(diff) != 1 || diff[0].Field != "windows[0].masd_threshold" || diff[0].New != "9.5" {
		t.Fatalf("diff v1 -> v2: %+v", diff)
	}
	if got := countAudit(t, s, "protocol.create"); got != 3 {
		t.Fatalf("protocol.create audited %d times, want 3", got)
	}
}

func TestActivateKeepsOneActive(t *testing.T) {
	s := newStore(t)
	ctx := context.Background()
	v1 := mustDefault(t, s)
	v2 := newVersion(t, s, v1.ID, func(q *screen.Protocol) { q.MinWearHours = 12 })
	if _, err := s.ActivateProtocol(ctx, admin, v2.ID); err != nil {
		t.Fatal(err)
	}
	if _, err := s.ActivateProtocol(ctx, admin, v2.ID); err != nil { // no change
		t.Fatal(err)
	}
	act, err := s.ActiveProtocol(ctx)
	if err != nil || act.ID != v2.ID {
		t.Fatalf("active %v (err %v), want v2", act.Label(), err)
	}
	var n int
	s.Pool().QueryRow(ctx, `SELECT count(*) FROM protocols WHERE active`).Scan(&n)
	if n != 1 {
		t.Fatalf("%d active versions", n)
	}
	if got := countAudit(t, s, "protocol.activate"); got != 2 { // v1 at start-up, v2 once
		t.Fatalf("protocol.activate audited %d times, want 2", got)
	}
	if _, err := s.ActivateProtocol(ctx, admin, 424242); !errors.Is(err, cohort.ErrNotFound) {
		t.Fatalf("unknown version: err %v", err)
	}
	// The database itself refuses a second active version.
	if _, err := s.Pool().Exec(ctx, `UPDATE protocols SET active = true WHERE id = $1`, v1.ID); err == nil {
		t.Fatal("a second active version was stored")
	}
}

func TestProtocolImmutableOnceUsed(t *testing.T) {
	s := newStore(t)
	ctx := context.Background()
	v1 := mustDefault(t, s)
	v2 := newVersion(t, s, v1.ID, func(q *screen.Protocol) { q.MinWearHours = 12 })
	// Unused versions may still be corrected at the database level.
	if _, err := s.Pool().Exec(ctx, `UPDATE protocols SET params = params WHERE id = $1`, v2.ID); err != nil {
		t.Fatalf("update of an unused version: %v", err)
	}
	pid := addParticipantWithWeek(t, s, "P-1", false)
	if _, err := db.NewScreener(s, nil).ScreenNow(ctx, []int64{pid}, v1.ID, nil); err != nil {
		t.Fatal(err)
	}
	got, err := s.Protocol(ctx, v1.ID)
	if err != nil || !got.Used {
		t.Fatalf("v1 used=%v after screening (err %v)", got.Used, err)
	}
	for _, sql := range []string{
		`UPDATE protocols SET params = jsonb_set(params, '{min_wear_hours}', '1') WHERE id = $1`,
		`UPDATE protocols SET version = 7 WHERE id = $1`,
		`UPDATE protocols SET used = false WHERE id = $1`,
		`DELETE FROM protocols WHERE id = $1`,
	} {
		if _, err := s.Pool().Exec(ctx, sql, v1.ID); err == nil || !strings.Contains(err.Error(), "has produced results") {
			t.Errorf("%s: err %v, want refusal by the trigger", sql, err)
		}
	}
	// Activation and notes remain possible.
	if _, err := s.Pool().Exec(ctx, `UPDATE protocols SET note = 'reviewed' WHERE id = $1`, v1.ID); err != nil {
		t.Errorf("note on a used version: %v", err)
	}
	if got := countAudit(t, s, "protocol.used"); got != 1 {
		t.Errorf("protocol.used audited %d times, want 1", got)
	}
}

// The protocols pages' result counts are kept as results are written
// (migration 0092): inserted, upserted again, deleted and the ledger folded,
// they equal a count of the results table at every step, for each version.
func TestProtocolResultCountsAreKept(t *testing.T) {
	s := newStore(t)
	ctx := context.Background()
	v1 := mustDefault(t, s)
	v2 := newVersion(t, s, v1.ID, func(q *screen.Protocol) { q.MinWearHours = 30 })
	seedParticipants(t, s, 40)
	check := func(step string) {
		t.Helper()
		want := map[int]int64{}
		rows, err := s.Pool().Query(ctx, `SELECT protocol_id, count(*) FROM screen_results GROUP BY 1`)
		if err != nil {
			t.Fatal(err)
		}
		for rows.Next() {
			var id int
			var n int64
			rows.Scan(&id, &n)
			want[id] = n
		}
		rows.Close()
		all, err := s.Protocols(ctx)
		if err != nil {
			t.Fatal(err)
		}
		for _, p := range all {
			one, err := s.Protocol(ctx, p.ID)
			if err != nil {
				t.Fatal(err)
			}
			if p.Results != want[p.ID] || one.Results != want[p.ID] {
				t.Errorf("%s: %s lists %d results, its page %d; the table holds %d", step, p.Label(), p.Results, one.Results, want[p.ID])
			}
		}
	}
	write := func(protocol, weeks int) {
		t.Helper()
		mustExec(t, s, `INSERT INTO screen_results (participant_id, protocol_id, week, verdict, reason, result, input_digest)
			SELECT p.id, $1, w, 'negative', 'test', '{}', 'x' FROM participants p CROSS JOIN generate_series(1, $2) w
			ON CONFLICT (participant_id, protocol_id, week) DO UPDATE SET reason = 'again'`, protocol, weeks)
	}
	check("none")
	write(v1.ID, 3)
	check("first screen")
	write(v1.ID, 5) // weeks 1-3 upserted, 4-5 new
	write(v2.ID, 2)
	check("screened again, and by a second version")
	mustExec(t, s, `DELETE FROM screen_results WHERE protocol_id = $1 AND week = 5`, v1.ID)
	check("results deleted")
	if err := s.CompactLedgers(ctx); err != nil {
		t.Fatal(err)
	}
	check("ledger folded")
	var rowsLeft int
	if err := s.Pool().QueryRow(ctx, `SELECT count(*) FROM protocol_result_counts`).Scan(&rowsLeft); err != nil || rowsLeft != 2 {
		t.Errorf("the folded ledger holds %d rows (err %v), want one per version", rowsLeft, err)
	}
}
