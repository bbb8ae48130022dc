package main

import (
	"context"
	"log/slog"
	"sync"
	"time"

	"cohortdesk/db"
)

// interruptedEvery is how often a running server looks for imports whose
// process died (no heartbeat for two minutes, see db.MarkInterruptedImports).
const interruptedEvery = time.Minute

// watchInterruptedImports marks the imports of dead processes as interrupted
// at start-up - a server killed in the middle of an upload leaves its import
// "running" - and then every interval, since with several instances the one
// that died need not be the one that restarts. The returned function stops
// the watch and waits for it.
func watchInterruptedImports(ctx context.Context, store *db.Store, every time.Duration, log *slog.Logger) func() {
	mark := func() {
		n, err := store.MarkInterruptedImports(ctx)
		switch {
		case err != nil && ctx.Err() == nil:
			log.Warn("marking interrupted imports", "err", err)
		case n > 0:
			log.Info("imports marked interrupted (their process stopped before finishing; nothing of them was stored)", "count", n)
		}
	}
	mark()
	ctx, cancel := context.WithCancel(ctx)
	var wg sync.WaitGroup
	wg.Go(func() {
		t := time.NewTicker(every)
		defer t.Stop()
		for {
			select {
			case <-ctx.Done():
				return
			case <-t.C:
				mark()
			}
		}
	})
	return func() {
		cancel()
		wg.Wait()
	}
}
