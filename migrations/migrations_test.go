package migrations_test

import (
	"context"
	"encoding/json"
	"testing"

	"cohortdesk/cohort/screen"
	"cohortdesk/db"
	"cohortdesk/db/dbtest"
	"cohortdesk/migrations"

	"github.com/jackc/pgx/v5/pgxpool"
	"github.com/jackc/pgx/v5/stdlib"
	"github.com/pressly/goose/v3"
)

func TestMain(m *testing.M) { dbtest.Main(m) }

// TestUpOnEmptyDatabase applies every migration to a database with no schema,
// then again to show a second run changes nothing.
func TestUpOnEmptyDatabase(t *testing.T) {
	ctx := context.Background()
	pool, err := db.Open(ctx, dbtest.Empty(t), 2)
	if err != nil {
		t.Fatal(err)
	}
	defer pool.Close()
	n, err := migrations.Up(ctx, pool)
	if err != nil {
		t.Fatalf("Up: %v", err)
	}
	list, err := migrations.List(ctx, pool)
	if err != nil {
		t.Fatal(err)
	}
	if n != len(list) || n == 0 {
		t.Fatalf("applied %d migrations, know %d", n, len(list))
	}
	for _, s := range list {
		if !s.Applied {
			t.Errorf("migration %d %s not applied", s.Version, s.Name)
		}
	}
	again, err := migrations.Up(ctx, pool)
	if err != nil || again != 0 {
		t.Fatalf("second Up applied %d (err %v), want 0", again, err)
	}
}

// TestSweepsTakeOverStoredExplorations: a threshold sweep stored before
// 0010 (table explorations, job kind "explore") reads back after it through
// the store as it was stored, its job now of the kind the workers run.
func TestSweepsTakeOverStoredExplorations(t *testing.T) {
	ctx := context.Background()
	pool := migratedTo(t, 9)
	params, err := json.Marshal(screen.DefaultProtocol())
	if err != nil {
		t.Fatal(err)
	}
	// The result as 0009's rows hold it: the Go field names of the result
	// type then, written out here by hand.
	const result = `{"Protocol": {"ID": 1, "Name": "standard", "Version": 1}, "Param": "windows[0].masd_threshold",
		"Rows": [{"Value": 4, "Flagged": 2, "Table": {"TP": 1, "FP": 1, "FN": 0, "TN": 3}, "PPV": {"X": 1, "N": 2},
		          "Sensitivity": {"X": 1, "N": 1}, "PPVCI": {"Lo": 0.0945, "Hi": 0.9055}, "SensitivityCI": null}],
		"Weeks": 6, "ConfirmedWeeks": 1, "NotAFWeeks": 4, "UninterpretableWeeks": 1, "PendingWeeks": 0}`
	var id int64
	err = pool.QueryRow(ctx, `
		WITH proto AS (INSERT INTO protocols (name, version, params) VALUES ('standard', 1, $1) RETURNING id),
		job AS (INSERT INTO jobs (kind, label, state) VALUES ('explore', 'threshold sweep', 'done') RETURNING id)
		INSERT INTO explorations (protocol_id, param, sweep, job_id, result, created_by)
		SELECT proto.id, 'windows[0].masd_threshold', '[4]', job.id, $2, 'Investigator' FROM proto, job RETURNING id`,
		params, result).Scan(&id)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := migrations.Up(ctx, pool); err != nil {
		t.Fatal(err)
	}
	run, err := db.New(pool, nil).SweepRun(ctx, id)
	if err != nil {
		t.Fatal(err)
	}
	if run.Job.Kind != db.JobSweep || run.Param != "windows[0].masd_threshold" || len(run.Values) != 1 || run.Values[0] != 4 || run.CreatedBy != "Investigator" {
		t.Fatalf("run %+v", run)
	}
	r := run.Result
	if r == nil || r.Protocol.Name != "standard" || r.Weeks != 6 || r.ConfirmedWeeks != 1 || r.NotAFWeeks != 4 || r.UninterpretableWeeks != 1 ||
		len(r.Rows) != 1 || r.Rows[0].Table.TN != 3 || r.Rows[0].PPV.N != 2 || r.Rows[0].PPVCI == nil || r.Rows[0].PPVCI.Hi != 0.9055 || r.Rows[0].SensitivityCI != nil {
		t.Fatalf("result %+v", r)
	}
	var left int
	if err := pool.QueryRow(ctx, `SELECT count(*) FROM jobs WHERE kind = 'explore'`).Scan(&left); err != nil || left != 0 {
		t.Fatalf("%d jobs of the old kind (err %v)", left, err)
	}
}

// migratedTo is a fresh database with the migrations up to version applied,
// for a test that stores rows as an earlier schema held them and then
// checks what a later file does with them. It is closed when the test ends.
func migratedTo(t *testing.T, version int64) *pgxpool.Pool {
	t.Helper()
	ctx := context.Background()
	pool, err := db.Open(ctx, dbtest.Empty(t), 2)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(pool.Close)
	sqlDB := stdlib.OpenDBFromPool(pool)
	defer sqlDB.Close()
	p, err := goose.NewProvider(goose.DialectPostgres, sqlDB, migrations.FS())
	if err != nil {
		t.Fatal(err)
	}
	if _, err := p.UpTo(ctx, version); err != nil {
		t.Fatal(err)
	}
	return pool
}
