package migrations_test

import (
	"context"
	"encoding/json"
	"testing"

	"cohortdesk/cohort/overread"
	"cohortdesk/cohort/screen"
	"cohortdesk/migrations"
)

// TestRecorderReadingsTakeOurWords: recordings stored before 0070 with the
// earlier values of the recorder's own reading read back after it with the
// new values, each mapped to the reading it meant; the column's default and
// its check follow, so an earlier value can no longer be stored.
func TestRecorderReadingsTakeOurWords(t *testing.T) {
	ctx := context.Background()
	pool := migratedTo(t, 69)
	params, err := json.Marshal(screen.DefaultProtocol())
	if err != nil {
		t.Fatal(err)
	}
	if _, err := pool.Exec(ctx, `INSERT INTO protocols (name, version, params) VALUES ('standard', 1, $1)`, params); err != nil {
		t.Fatal(err)
	}
	for _, q := range []string{
		`INSERT INTO sites (code, name, time_zone) VALUES ('MG', 'Migration clinic', 'UTC')`,
		`INSERT INTO participants (study_id, site_id, time_zone, enrolled_on) SELECT 'MG-0001', id, 'UTC', date '2026-01-05' FROM sites`,
		`INSERT INTO cases (participant_id, protocol_id, first_week, last_week, state, flagged_at)
		 SELECT p.id, pr.id, 1, 1, 'recording_received', timestamptz '2026-01-20 10:00Z' FROM participants p, protocols pr`,
	} {
		if _, err := pool.Exec(ctx, q); err != nil {
			t.Fatalf("%s: %v", q, err)
		}
	}
	want := map[string]overread.Auto{
		"none": overread.AutoNoReading, "af": overread.AutoSuggestsAF, "sinus": overread.AutoSuggestsRegular,
		"unclassified": overread.AutoNoCall, "unreadable": overread.AutoNotAnalysed,
	}
	ids := map[string]int64{}
	for old := range want {
		var id int64
		if err := pool.QueryRow(ctx, `INSERT INTO recordings (case_id, participant_id, taken_at, duration_s, auto_interpretation)
			SELECT id, participant_id, timestamptz '2026-01-25 10:00Z', 45, $1 FROM cases RETURNING id`, old).Scan(&id); err != nil {
			t.Fatalf("store %q before 0070: %v", old, err)
		}
		ids[old] = id
	}
	if _, err := migrations.Up(ctx, pool); err != nil {
		t.Fatal(err)
	}
	for old, id := range ids {
		var got string
		if err := pool.QueryRow(ctx, `SELECT auto_interpretation FROM recordings WHERE id = $1`, id).Scan(&got); err != nil {
			t.Fatal(err)
		}
		if overread.Auto(got) != want[old] || !overread.Auto(got).Valid() {
			t.Errorf("%q became %q, want %q (%s)", old, got, want[old], want[old].Label())
		}
	}
	var def string
	if err := pool.QueryRow(ctx, `INSERT INTO recordings (case_id, participant_id, taken_at, duration_s)
		SELECT id, participant_id, timestamptz '2026-01-26 10:00Z', 45 FROM cases RETURNING auto_interpretation`).Scan(&def); err != nil || overread.Auto(def) != overread.AutoNoReading {
		t.Errorf("a recording without a reading stores %q (err %v), want %q", def, err, overread.AutoNoReading)
	}
	for old := range want {
		if _, err := pool.Exec(ctx, `INSERT INTO recordings (case_id, participant_id, taken_at, duration_s, auto_interpretation)
			SELECT id, participant_id, timestamptz '2026-01-27 10:00Z', 45, $1 FROM cases`, old); err == nil {
			t.Errorf("the earlier value %q is still accepted after 0070", old)
		}
	}
	for _, a := range overread.Autos() {
		if _, err := pool.Exec(ctx, `INSERT INTO recordings (case_id, participant_id, taken_at, duration_s, auto_interpretation)
			SELECT id, participant_id, timestamptz '2026-01-27 10:00Z', 45, $1 FROM cases`, string(a)); err != nil {
			t.Errorf("the value %q is refused after 0070: %v", a, err)
		}
	}
}
