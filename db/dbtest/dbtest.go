// Package dbtest gives tests a real PostgreSQL: one private cluster per test
// binary, started by the same code as the demo command (db/pgcluster), a template
// database migrated once, and a fresh database cloned from it for each test.
//
// There is no skip: when the cluster cannot start, the test binary fails with
// the reason, on a developer's machine as under CI=true.
//
// As in the demo, the cluster's superuser owns the schema (it runs the
// migrations) and tests connect as the unprivileged application role
// (db.AppRole), so every store method is proven to work with the grants
// production gives. Tests that must do what only the owner may (add a
// trigger, read as the owner) ask for Owner.
package dbtest

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"sync"
	"sync/atomic"
	"testing"

	"cohortdesk/db"
	"cohortdesk/db/pgcluster"
	"cohortdesk/migrations"

	"github.com/jackc/pgx/v5/pgxpool"
)

var (
	shared  *pgcluster.Cluster
	counter atomic.Int64
	tmplMu  sync.Mutex
)

const template = "cohortdesk_template"

// Main starts the package's cluster, runs the tests and removes the cluster.
// Call it from TestMain: func TestMain(m *testing.M) { dbtest.Main(m) }.
func Main(m *testing.M) {
	code, err := run(m)
	if err != nil {
		fmt.Fprintln(os.Stderr, "dbtest:", err)
		if code == 0 {
			code = 1
		}
	}
	os.Exit(code)
}

func run(m *testing.M) (int, error) {
	ctx := context.Background()
	// /tmp is reachable by the unprivileged server user when the tests run as root.
	dir, err := os.MkdirTemp("", "cohortdesk-test-")
	if err != nil {
		return 1, err
	}
	if err := os.Chmod(dir, 0o755); err != nil {
		return 1, err
	}
	defer os.RemoveAll(dir)
	c, err := pgcluster.Start(ctx, pgcluster.Config{Dir: filepath.Join(dir, "pg"), Fast: true}, os.Getenv)
	if err != nil {
		return 1, fmt.Errorf("cannot start the private PostgreSQL for tests: %w", err)
	}
	shared = c
	defer c.Stop()
	if err := makeTemplate(ctx); err != nil {
		return 1, err
	}
	return m.Run(), nil
}

// Cluster is the running test cluster, for tests that stop or restart it.
func Cluster() *pgcluster.Cluster { return shared }

func makeTemplate(ctx context.Context) error {
	admin, err := pgxpool.New(ctx, shared.URL("postgres"))
	if err != nil {
		return err
	}
	defer admin.Close()
	if _, err := admin.Exec(ctx, "CREATE DATABASE "+template); err != nil {
		return fmt.Errorf("create template database: %w", err)
	}
	if err := db.EnsureAppRole(ctx, admin, db.AppRole); err != nil {
		return err
	}
	pool, err := db.Open(ctx, shared.URL(template), 4)
	if err != nil {
		return err
	}
	defer pool.Close()
	if _, err := migrations.Up(ctx, pool); err != nil {
		return fmt.Errorf("migrate template database: %w", err)
	}
	if err := db.GrantApp(ctx, pool, db.AppRole); err != nil {
		return fmt.Errorf("template database: %w", err)
	}
	// Test accounts sign in with a password alone, as in the demo; tests of
	// the second factor turn the rule on (it is on by default in a real
	// deployment: migrations/0022).
	if _, err := pool.Exec(ctx, `UPDATE sign_in_policy SET second_factor_required = false`); err != nil {
		return fmt.Errorf("template database: %w", err)
	}
	return nil
}

// URL returns the URL of a new, migrated, empty database that is dropped when
// the test ends, as the application role.
func URL(tb testing.TB) string {
	tb.Helper()
	return shared.URLAs(newDatabase(tb), db.AppRole)
}

// OwnerURL is URL as the schema's owner (the superuser), for programs that
// run the migrations or build their own tables (the bench).
func OwnerURL(tb testing.TB) string {
	tb.Helper()
	return shared.URL(newDatabase(tb))
}

// Owner opens a pool as the schema's owner on the database of pool (from
// Pool or URL), closed when the test ends.
func Owner(tb testing.TB, pool *pgxpool.Pool) *pgxpool.Pool {
	tb.Helper()
	p, err := db.Open(context.Background(), shared.URL(pool.Config().ConnConfig.Database), 4)
	if err != nil {
		tb.Fatalf("dbtest: owner: %v", err)
	}
	tb.Cleanup(p.Close)
	return p
}

func newDatabase(tb testing.TB) string {
	tb.Helper()
	if shared == nil {
		tb.Fatal("dbtest: no cluster; call dbtest.Main from TestMain")
	}
	ctx := context.Background()
	name := fmt.Sprintf("t%d_%d", os.Getpid(), counter.Add(1))
	admin, err := pgxpool.New(ctx, shared.URL("postgres"))
	if err != nil {
		tb.Fatalf("dbtest: %v", err)
	}
	defer admin.Close()
	// CREATE DATABASE ... TEMPLATE needs the template to have no other sessions.
	tmplMu.Lock()
	_, err = admin.Exec(ctx, fmt.Sprintf("CREATE DATABASE %s TEMPLATE %s", name, template))
	tmplMu.Unlock()
	if err != nil {
		tb.Fatalf("dbtest: create database: %v", err)
	}
	tb.Cleanup(func() {
		a, err := pgxpool.New(context.Background(), shared.URL("postgres"))
		if err != nil {
			return
		}
		defer a.Close()
		_, _ = a.Exec(context.Background(), "DROP DATABASE IF EXISTS "+name+" WITH (FORCE)")
	})
	return name
}

// Pool returns a pool as the application role on a new migrated database,
// closed when the test ends.
func Pool(tb testing.TB) *pgxpool.Pool {
	tb.Helper()
	pool, err := db.Open(context.Background(), URL(tb), 8)
	if err != nil {
		tb.Fatalf("dbtest: %v", err)
	}
	tb.Cleanup(pool.Close)
	return pool
}

// Empty returns the URL of a new database with no schema at all, as its
// owner, for tests of the migrations themselves.
func Empty(tb testing.TB) string {
	tb.Helper()
	ctx := context.Background()
	name := fmt.Sprintf("e%d_%d", os.Getpid(), counter.Add(1))
	admin, err := pgxpool.New(ctx, shared.URL("postgres"))
	if err != nil {
		tb.Fatalf("dbtest: %v", err)
	}
	defer admin.Close()
	if _, err := admin.Exec(ctx, "CREATE DATABASE "+name); err != nil {
		tb.Fatalf("dbtest: %v", err)
	}
	tb.Cleanup(func() {
		a, err := pgxpool.New(context.Background(), shared.URL("postgres"))
		if err == nil {
			defer a.Close()
			_, _ = a.Exec(context.Background(), "DROP DATABASE IF EXISTS "+name+" WITH (FORCE)")
		}
	})
	return shared.URL(name)
}
