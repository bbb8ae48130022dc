package db_test

import (
	"context"
	"strings"
	"testing"

	"cohortdesk/cohort"
	"cohortdesk/db"
	"cohortdesk/db/dbtest"
)

// TestAppRoleCannotRewriteTheAuditTrail (issue 14, finding 5): connected as
// the application role, the store works, and every way to change or remove
// audit rows is refused: UPDATE, DELETE, TRUNCATE, disabling or dropping the
// triggers, taking the table over, skipping triggers with
// session_replication_role. The rows are all still there.
func TestAppRoleCannotRewriteTheAuditTrail(t *testing.T) {
	ctx := context.Background()
	pool := dbtest.Pool(t)
	var who string
	pool.QueryRow(ctx, `SELECT current_user`).Scan(&who)
	if who != db.AppRole {
		t.Fatalf("tests connect as %q, want the application role %q", who, db.AppRole)
	}
	store := db.New(pool, nil)
	if err := store.Audit(ctx, cohort.System, "test.event", "test", "1", nil, map[string]int{"n": 1}); err != nil {
		t.Fatalf("the application role cannot add to the audit trail: %v", err)
	}
	if probs, err := db.RoleProblems(ctx, pool); err != nil || len(probs) != 0 {
		t.Fatalf("role problems of the application role: %v %v", probs, err)
	}
	for _, sql := range []string{
		`UPDATE audit_events SET action = 'rewritten'`,
		`DELETE FROM audit_events`,
		`TRUNCATE audit_events`,
		`ALTER TABLE audit_events DISABLE TRIGGER audit_events_no_update_delete`,
		`ALTER TABLE audit_events DISABLE TRIGGER ALL`,
		`DROP TRIGGER audit_events_no_update_delete ON audit_events`,
		`DROP FUNCTION audit_events_append_only() CASCADE`,
		`ALTER TABLE audit_events OWNER TO ` + db.AppRole,
		`DROP TABLE audit_events CASCADE`,
		`SET session_replication_role = replica`,
		`CREATE TABLE audit_copy AS SELECT * FROM audit_events`,
	} {
		if _, err := pool.Exec(ctx, sql); err == nil {
			t.Errorf("%s: allowed", sql)
		} else if !strings.Contains(err.Error(), "permission denied") && !strings.Contains(err.Error(), "must be owner") &&
			!strings.Contains(err.Error(), "append-only") {
			t.Errorf("%s: refused for another reason: %v", sql, err)
		}
	}
	// In a transaction, SET LOCAL then DELETE: refused at the SET.
	tx, err := pool.Begin(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := tx.Exec(ctx, `SET LOCAL session_replication_role = replica`); err == nil {
		if _, err := tx.Exec(ctx, `DELETE FROM audit_events`); err == nil {
			t.Error("SET LOCAL session_replication_role and DELETE: allowed")
		}
	}
	tx.Rollback(ctx)
	var n int
	dbtest.Owner(t, pool).QueryRow(ctx, `SELECT count(*) FROM audit_events WHERE action = 'test.event'`).Scan(&n)
	if n != 1 {
		t.Fatalf("audit rows: %d, want 1", n)
	}
	// The owner is the role that could: the check says so.
	if probs, _ := db.RoleProblems(ctx, dbtest.Owner(t, pool)); len(probs) == 0 {
		t.Error("the owner (a superuser) is reported as harmless")
	}
}

// TestGrantAppCoversLaterTables (issue 14, finding 5): a table a later
// migration creates gets the application role's grants by the owner's
// default privileges, without running the grants again.
func TestGrantAppCoversLaterTables(t *testing.T) {
	ctx := context.Background()
	pool := dbtest.Pool(t)
	owner := dbtest.Owner(t, pool)
	if _, err := owner.Exec(ctx, `CREATE TABLE later_table (id bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY, v text)`); err != nil {
		t.Fatal(err)
	}
	for _, sql := range []string{`INSERT INTO later_table (v) VALUES ('a')`, `UPDATE later_table SET v = 'b'`, `SELECT count(*) FROM later_table`, `DELETE FROM later_table`} {
		if _, err := pool.Exec(ctx, sql); err != nil {
			t.Errorf("as the application role, %s: %v", sql, err)
		}
	}
	if _, err := pool.Exec(ctx, `DROP TABLE later_table`); err == nil {
		t.Error("the application role dropped the owner's table")
	}
}
