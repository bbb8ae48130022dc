package dbtest

import (
	"bytes"
	"context"
	"os"
	"path/filepath"
	"sync"
	"testing"

	"cohortdesk/db"
	"cohortdesk/db/pgcluster"
	"cohortdesk/migrations"

	"github.com/jackc/pgx/v5/pgxpool"
)

// LogBuffer is a log that a server or a standby's monitor writes while the
// test reads it.
type LogBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (l *LogBuffer) Write(p []byte) (int, error) {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.b.Write(p)
}

func (l *LogBuffer) String() string {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.b.String()
}

// Replicated is a private primary whose database "app" holds the migrated
// schema, and a hot standby started from it by streaming replication
// (pgcluster.StartStandby), each with a pool on the app's database. Both
// clusters stop, and both pools close, when the test ends.
type Replicated struct {
	Primary, Standby  *pgcluster.Cluster
	Pool, StandbyPool *pgxpool.Pool
	standbyCfg        pgcluster.Config
}

// StartReplicated starts the pair, the primary on port and the standby on
// port+1 with the server settings given (recovery_min_apply_delay makes it
// replay late). Ports are the test's own: two tests running at once must
// not share them.
func StartReplicated(tb testing.TB, port int, standby map[string]string) *Replicated {
	tb.Helper()
	ctx := context.Background()
	base, err := os.MkdirTemp("", "standby-")
	if err != nil {
		tb.Fatal(err)
	}
	os.Chmod(base, 0o755)
	tb.Cleanup(func() { os.RemoveAll(base) })
	primary, err := pgcluster.Start(ctx, pgcluster.Config{Dir: filepath.Join(base, "primary"), Port: port, Fast: true}, os.Getenv)
	if err != nil {
		tb.Fatal(err)
	}
	tb.Cleanup(func() { primary.Stop() })
	admin, err := pgxpool.New(ctx, primary.URL("postgres"))
	if err != nil {
		tb.Fatal(err)
	}
	_, err = admin.Exec(ctx, `CREATE DATABASE app`)
	admin.Close()
	if err != nil {
		tb.Fatal(err)
	}
	pool, err := db.Open(ctx, primary.URL("app"), 20)
	if err != nil {
		tb.Fatal(err)
	}
	tb.Cleanup(pool.Close)
	if _, err := migrations.Up(ctx, pool); err != nil {
		tb.Fatal(err)
	}
	r := &Replicated{Primary: primary, Pool: pool,
		standbyCfg: pgcluster.Config{Dir: filepath.Join(base, "standby"), Port: port + 1, Fast: true, Settings: standby}}
	r.StartStandby(tb)
	tb.Cleanup(func() {
		if r.Standby != nil {
			r.Standby.Stop()
		}
	})
	spool, err := db.Open(ctx, r.Standby.URL("app"), 20)
	if err != nil {
		tb.Fatal(err)
	}
	tb.Cleanup(spool.Close)
	r.StandbyPool = spool
	return r
}

// StartStandby starts the standby again after StopStandby, from its own
// folder (it catches up from the primary); the pool reconnects to it.
func (r *Replicated) StartStandby(tb testing.TB) {
	tb.Helper()
	s, err := pgcluster.StartStandby(context.Background(), r.Primary, r.standbyCfg, os.Getenv)
	if err != nil {
		tb.Fatal(err)
	}
	r.Standby = s
}

// StopStandby stops the standby, as a machine that goes away.
func (r *Replicated) StopStandby(tb testing.TB) {
	tb.Helper()
	if err := r.Standby.Stop(); err != nil {
		tb.Fatal(err)
	}
}
