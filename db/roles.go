package db

import (
	"context"
	"fmt"
	"strings"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgxpool"
)

// Two database roles keep the audit trail out of the application's reach:
//
//   - the owner owns the schema: it runs the migrations (so it owns every
//     table, the audit table and its append-only triggers among them);
//   - the application role, which the running server connects as, has only
//     what the application needs: it reads and writes the working tables,
//     and may only add to and read the append-only ones. It owns nothing, so
//     it can neither drop nor disable a trigger, nor alter or truncate a
//     table, and, not being a superuser, cannot set
//     session_replication_role to skip triggers.
//
// The demo's and the tests' private clusters use the cluster's superuser as
// the owner and create the application role themselves (EnsureAppRole); a
// production database gets both from its administrator (README, "Production").

// AppRole is the application role's name in the private clusters.
const AppRole = "cohortdesk_app"

// appendOnly are the tables the application may only add to and read.
var appendOnly = []string{"audit_events"}

// EnsureAppRole creates the application role (able to log in, no other
// attribute) when it does not exist. super must be a superuser's connection
// (or a role with CREATEROLE).
func EnsureAppRole(ctx context.Context, super *pgxpool.Pool, role string) error {
	var exists bool
	if err := super.QueryRow(ctx, `SELECT EXISTS (SELECT 1 FROM pg_roles WHERE rolname = $1)`, role).Scan(&exists); err != nil {
		return fmt.Errorf("db: app role: %w", err)
	}
	if exists {
		return nil
	}
	if _, err := super.Exec(ctx, `CREATE ROLE `+pgx.Identifier{role}.Sanitize()+` LOGIN NOSUPERUSER NOCREATEDB NOCREATEROLE NOREPLICATION NOBYPASSRLS`); err != nil {
		return fmt.Errorf("db: create app role %s: %w", role, err)
	}
	return nil
}

// GrantApp gives the application role what it needs on every table and
// sequence of the schema, as the owner (owner must be the connection of the
// role that runs the migrations), and sets the owner's default privileges so
// tables that later migrations create get the same grants. Run after every
// migration, it also takes back what an append-only table must not allow.
func GrantApp(ctx context.Context, owner *pgxpool.Pool, role string) error {
	r := pgx.Identifier{role}.Sanitize()
	var self bool
	if err := owner.QueryRow(ctx, `SELECT current_user = $1`, role).Scan(&self); err != nil {
		return fmt.Errorf("db: grant: %w", err)
	}
	if self {
		return fmt.Errorf("db: grant: the application role %s is the role that runs the migrations; give the migrations their own owner role", role)
	}
	stmts := []string{
		`GRANT CONNECT ON DATABASE ` + pgx.Identifier{databaseName(ctx, owner)}.Sanitize() + ` TO ` + r,
		`GRANT USAGE ON SCHEMA public TO ` + r,
		`GRANT SELECT, INSERT, UPDATE, DELETE ON ALL TABLES IN SCHEMA public TO ` + r,
		`GRANT USAGE, SELECT ON ALL SEQUENCES IN SCHEMA public TO ` + r,
		`ALTER DEFAULT PRIVILEGES IN SCHEMA public GRANT SELECT, INSERT, UPDATE, DELETE ON TABLES TO ` + r,
		`ALTER DEFAULT PRIVILEGES IN SCHEMA public GRANT USAGE, SELECT ON SEQUENCES TO ` + r,
		// The migrations' own bookkeeping is the owner's: the application
		// may read which have run, nothing more.
		`REVOKE INSERT, UPDATE, DELETE ON goose_db_version FROM ` + r,
	}
	for _, t := range appendOnly {
		stmts = append(stmts, `REVOKE UPDATE, DELETE, TRUNCATE, REFERENCES, TRIGGER ON `+pgx.Identifier{t}.Sanitize()+` FROM `+r)
	}
	for _, q := range stmts {
		if _, err := owner.Exec(ctx, q); err != nil {
			return fmt.Errorf("db: grant (%s): %w", strings.SplitN(q, " TO ", 2)[0], err)
		}
	}
	return nil
}

func databaseName(ctx context.Context, pool *pgxpool.Pool) string {
	var name string
	_ = pool.QueryRow(ctx, `SELECT current_database()`).Scan(&name)
	return name
}

// RoleProblems lists what the pool's role could do to the audit trail that
// the application role must not: be a superuser, own an append-only table,
// or be allowed to change or empty one. Empty means the role is as it should
// be. The server logs each at start.
func RoleProblems(ctx context.Context, pool *pgxpool.Pool) ([]string, error) {
	var role string
	var super, bypass bool
	if err := pool.QueryRow(ctx, `SELECT current_user, rolsuper, rolbypassrls FROM pg_roles WHERE rolname = current_user`).Scan(&role, &super, &bypass); err != nil {
		return nil, fmt.Errorf("db: role check: %w", err)
	}
	var out []string
	if super {
		out = append(out, fmt.Sprintf("the database role %s is a superuser: it can switch off the audit trail's triggers", role))
	}
	for _, t := range appendOnly {
		var owns, upd, del, trunc bool
		err := pool.QueryRow(ctx, `SELECT pg_get_userbyid(c.relowner) = current_user,
			has_table_privilege(c.oid, 'UPDATE'), has_table_privilege(c.oid, 'DELETE'), has_table_privilege(c.oid, 'TRUNCATE')
			FROM pg_class c WHERE c.oid = to_regclass($1)`, t).Scan(&owns, &upd, &del, &trunc)
		if err == pgx.ErrNoRows {
			continue
		}
		if err != nil {
			return nil, fmt.Errorf("db: role check: %w", err)
		}
		if owns {
			out = append(out, fmt.Sprintf("the database role %s owns %s: it can drop or disable its append-only triggers", role, t))
		} else if upd || del || trunc {
			out = append(out, fmt.Sprintf("the database role %s may update, delete or truncate %s", role, t))
		}
	}
	return out, nil
}
