package db_test

import (
	"context"
	"log/slog"
	"strings"
	"sync"
	"testing"
	"time"

	"cohortdesk/db"
	"cohortdesk/db/dbtest"
)

// A standby that falls behind the primary by more than the setting serves
// no reads: they go to the primary, counted under "lag" and logged, never
// failing; once it has caught up it serves them again. The standby replays
// every change two seconds late (recovery_min_apply_delay) while the
// primary keeps writing, against a limit of half a second.
func TestLaggingStandbyFallsBackToThePrimary(t *testing.T) {
	ctx := context.Background()
	pair := dbtest.StartReplicated(t, 5641, map[string]string{"recovery_min_apply_delay": "2s"})
	pool := pair.Pool
	store := db.New(pool, nil)
	var logs dbtest.LogBuffer
	mctx, stopMonitor := context.WithCancel(ctx)
	defer stopMonitor()
	sb := store.UseStandby(mctx, pair.StandbyPool, db.StandbyOptions{MaxLag: 500 * time.Millisecond, Every: 50 * time.Millisecond,
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
