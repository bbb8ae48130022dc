package db_test

import (
	"bytes"
	"context"
	"log/slog"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/jackc/pgx/v5/pgxpool"

	"cohortdesk/db"
	"cohortdesk/db/pgcluster"
	"cohortdesk/migrations"
)

// syncBuffer is a log buffer the standby's monitor and the test share.
type syncBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (s *syncBuffer) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.Write(p)
}

func (s *syncBuffer) String() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.String()
}

// A standby that falls behind the primary by more than the setting serves
// no reads: they go to the primary, counted under "lag" and logged, never
// failing; once it has caught up it serves them again. The standby replays
// every change two seconds late (recovery_min_apply_delay) while the
// primary keeps writing, against a limit of half a second.
func TestLaggingStandbyFallsBackToThePrimary(t *testing.T) {
	ctx := context.Background()
	base, err := os.MkdirTemp("", "standby-lag-")
	if err != nil {
		t.Fatal(err)
	}
	os.Chmod(base, 0o755)
	t.Cleanup(func() { os.RemoveAll(base) })
	primary, err := pgcluster.Start(ctx, pgcluster.Config{Dir: filepath.Join(base, "primary"), Port: 5641, Fast: true}, os.Getenv)
	if err != nil {
		t.Fatal(err)
	}
	defer primary.Stop()
	admin, err := pgxpool.New(ctx, primary.URL("postgres"))
	if err != nil {
		t.Fatal(err)
	}
	if _, err := admin.Exec(ctx, `CREATE DATABASE app`); err != nil {
		t.Fatal(err)
	}
	admin.Close()
	pool, err := db.Open(ctx, primary.URL("app"), 8)
	if err != nil {
		t.Fatal(err)
	}
	defer pool.Close()
	if _, err := migrations.Up(ctx, pool); err != nil {
		t.Fatal(err)
	}
	store := db.New(pool, nil)
	standby, err := pgcluster.StartStandby(ctx, primary, pgcluster.Config{Dir: filepath.Join(base, "standby"), Port: 5642, Fast: true,
		Settings: map[string]string{"recovery_min_apply_delay": "2s"}}, os.Getenv)
	if err != nil {
		t.Fatal(err)
	}
	defer func() { standby.Stop() }()
	spool, err := db.Open(ctx, standby.URL("app"), 4)
	if err != nil {
		t.Fatal(err)
	}
	defer spool.Close()
	var logs syncBuffer
	mctx, stopMonitor := context.WithCancel(ctx)
	defer stopMonitor()
	sb := store.UseStandby(mctx, spool, db.StandbyOptions{MaxLag: 500 * time.Millisecond, Every: 50 * time.Millisecond,
		Log: slog.New(slog.NewTextHandler(&logs, nil))})
	waitFor := func(what string, ok func() bool) {
		t.Helper()
		for deadline := time.Now().Add(60 * time.Second); !ok(); time.Sleep(20 * time.Millisecond) {
			if time.Now().After(deadline) {
				t.Fatalf("waited a minute for %s; log:\n%s", what, logs.String())
			}
		}
	}
	read := func() {
		t.Helper()
		if _, err := store.StudySettings(db.ReadFromStandby(ctx, "")); err != nil {
			t.Fatalf("a read failed: %v", err)
		}
	}
	// Nothing written: the standby has replayed everything and serves.
	waitFor("the standby to be used", sb.Up)
	before := sb.Reads.Load()
	read()
	if sb.Reads.Load() != before+1 {
		t.Fatal("a marked read did not go to the standby while it was current")
	}

	// The primary keeps writing; the standby replays two seconds late.
	if _, err := pool.Exec(ctx, `CREATE TABLE lag_probe (at timestamptz NOT NULL DEFAULT now())`); err != nil {
		t.Fatal(err)
	}
	stop := make(chan struct{})
	var wg sync.WaitGroup
	wg.Go(func() {
		for {
			select {
			case <-stop:
				return
			case <-time.After(50 * time.Millisecond):
				pool.Exec(ctx, `INSERT INTO lag_probe DEFAULT VALUES`)
			}
		}
	})
	waitFor("the standby to be left for its lag", func() bool { return !sb.Up() && sb.Lag() > 500*time.Millisecond })
	lagged, down := sb.FallbackCount(db.FallbackLag), sb.FallbackCount(db.FallbackDown)
	reads := sb.Reads.Load()
	for range 5 {
		read()
	}
	close(stop)
	wg.Wait()
	// (A measurement that times out on a loaded machine says "down": those
	// reads go to the primary too.)
	lag, gone := sb.FallbackCount(db.FallbackLag)-lagged, sb.FallbackCount(db.FallbackDown)-down
	if lag < 1 || lag+gone != 5 || sb.Reads.Load() != reads {
		t.Errorf("of 5 reads %d fell back for the lag, %d as the standby was down, %d went to the standby; want all 5 on the primary, for the lag",
			lag, gone, sb.Reads.Load()-reads)
	}
	if !strings.Contains(logs.String(), "lags the primary by") {
		t.Errorf("no log line says the standby lags; log:\n%s", logs.String())
	}

	// The writes stop: the standby catches up and serves again.
	waitFor("the standby to serve again", sb.Up)
	if !strings.Contains(logs.String(), "reads go to the standby again") {
		t.Errorf("no log line says reads went back to the standby; log:\n%s", logs.String())
	}
	before = sb.Reads.Load()
	read()
	if sb.Reads.Load() != before+1 {
		t.Error("a marked read did not go to the standby once it had caught up")
	}
}
