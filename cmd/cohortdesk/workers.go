package main

import (
	"context"
	"log/slog"
	"maps"
	"sync"

	"cohortdesk/db"
)

// newScreener is the one screening runner of a process, shared by its workers
// and the screen command: results of the active protocol open and extend
// follow-up cases.
func newScreener(store *db.Store) *db.Screener {
	return db.NewScreener(store, db.CaseSync(store))
}

// startWorkers runs n queue workers, with the handlers of more besides
// screening's, until ctx ends or the returned function
// is called; that function stops them and waits until each has handed back
// any job in progress.
func startWorkers(ctx context.Context, store *db.Store, n int, more map[string]db.JobFunc, log *slog.Logger) func() {
	if n <= 0 {
		log.Info("no background workers in this instance; another instance must work the job queue")
		return func() {}
	}
	ctx, cancel := context.WithCancel(ctx)
	var wg sync.WaitGroup
	handlers := newScreener(store).Handlers()
	maps.Copy(handlers, more)
	wg.Go(func() { db.RunWorkers(ctx, store, n, handlers, log) })
	log.Info("background workers started", "count", n)
	return func() {
		cancel()
		wg.Wait()
		log.Info("background workers stopped")
	}
}
