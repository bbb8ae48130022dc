package db

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"os"
	"runtime/debug"
	"strconv"
	"sync"
	"sync/atomic"
	"time"
)

// JobFunc does the work of one job kind. progress records units done out of
// total (it also keeps the lease); the returned outcome is a short summary
// shown on the progress page. ctx ends when the worker shuts down or loses the
// job; the function should then return promptly.
type JobFunc func(ctx context.Context, j Job, progress func(done, total int64) error) (outcome string, err error)

// permanent marks an error that a retry cannot mend (a protocol that does not
// exist, a malformed payload).
type permanent struct{ err error }

// Error is the wrapped error's message.
func (p permanent) Error() string { return p.err.Error() }

// Unwrap exposes the wrapped error.
func (p permanent) Unwrap() error { return p.err }

// Permanent wraps err so the worker fails the job at once instead of retrying.
func Permanent(err error) error {
	if err == nil {
		return nil
	}
	return permanent{err}
}

// later asks the worker to run the job again at a given time without counting
// the attempt.
type later struct {
	at  time.Time
	why string
}

// Error says why the job waits.
func (l later) Error() string { return l.why }

// Later is what a job returns to run again at at without counting the
// attempt: the job schedules its own retries (a message that keeps its own
// count of tries) or waits for a moment (the end of a participant's quiet
// hours). why is kept on the job.
func Later(at time.Time, why string) error { return later{at, why} }

// Worker takes jobs from the queue and runs them, one at a time. Several
// workers, in one process or many, may share a database.
type Worker struct {
	Store    *Store
	Name     string             // unique among running workers; NewWorkerName makes one
	Handlers map[string]JobFunc // by job kind; other kinds are left for other workers
	Lease    time.Duration      // how long a claim lasts without renewal; default 30 s
	Poll     time.Duration      // wait between empty polls; default 1 s
	Log      *slog.Logger       // nil: no logging
	// ProgressEvery limits progress writes; default 250 ms.
	ProgressEvery time.Duration
	// Backoff is the wait before retry n (1-based); default n² × 5 s.
	Backoff func(n int) time.Duration
}

var workerSeq atomic.Int64

// NewWorkerName returns a name unique to this process and call: host, process
// id and a sequence number.
func NewWorkerName() string {
	host, _ := os.Hostname()
	return host + "/" + strconv.Itoa(os.Getpid()) + "/" + strconv.FormatInt(workerSeq.Add(1), 10)
}

func (w *Worker) defaults() {
	if w.Lease <= 0 {
		w.Lease = 30 * time.Second
	}
	if w.Poll <= 0 {
		w.Poll = time.Second
	}
	if w.ProgressEvery <= 0 {
		w.ProgressEvery = 250 * time.Millisecond
	}
	if w.Backoff == nil {
		w.Backoff = func(n int) time.Duration { return time.Duration(n*n) * 5 * time.Second }
	}
	if w.Name == "" {
		w.Name = NewWorkerName()
	}
	if w.Log == nil {
		w.Log = slog.New(slog.DiscardHandler)
	}
}

func (w *Worker) kinds() []string {
	out := make([]string, 0, len(w.Handlers))
	for k := range w.Handlers {
		out = append(out, k)
	}
	return out
}

// Run works the queue until ctx ends. A job in progress at that moment is
// handed back to the queue without counting the attempt. Database errors are
// logged and retried after the poll interval, so a restart of PostgreSQL does
// not stop the worker.
func (w *Worker) Run(ctx context.Context) error {
	w.defaults()
	for {
		did, err := w.RunOne(ctx, 0)
		if ctx.Err() != nil {
			return nil
		}
		if err != nil {
			w.Log.Warn("job queue", "worker", w.Name, "err", err)
		}
		if did && err == nil {
			continue
		}
		t := time.NewTimer(w.Poll)
		select {
		case <-ctx.Done():
			t.Stop()
			return nil
		case <-t.C:
		}
	}
}

// RunOne claims one due job (only that job when only is not 0), runs it to the
// end and reports whether there was one.
func (w *Worker) RunOne(ctx context.Context, only int64) (bool, error) {
	w.defaults()
	j, ok, err := w.Store.ClaimJob(ctx, w.Name, w.Lease, w.kinds(), only)
	if err != nil || !ok {
		return false, err
	}
	return true, w.process(ctx, j)
}

// process runs a claimed job with a lease-renewing heartbeat and records how it
// ended.
func (w *Worker) process(parent context.Context, j Job) error {
	h := w.Handlers[j.Kind]
	ctx, cancel := context.WithCancel(parent)
	defer cancel()
	var lost atomic.Bool
	stop := make(chan struct{})
	var wg sync.WaitGroup
	wg.Add(1)
	go func() {
		defer wg.Done()
		t := time.NewTicker(w.Lease / 3)
		defer t.Stop()
		for {
			select {
			case <-stop:
				return
			case <-t.C:
				if err := w.Store.RenewJob(ctx, j.ID, w.Name, w.Lease); errors.Is(err, ErrJobLost) {
					lost.Store(true)
					cancel()
					return
				} else if err != nil && ctx.Err() == nil {
					w.Log.Warn("job lease renewal", "job", j.ID, "err", err)
				}
			}
		}
	}()
	var last time.Time
	progress := func(done, total int64) error {
		if now := time.Now(); now.Sub(last) >= w.ProgressEvery || (total > 0 && done >= total) {
			last = now
			if err := w.Store.JobProgress(ctx, j.ID, w.Name, done, total, w.Lease); err != nil {
				if errors.Is(err, ErrJobLost) {
					lost.Store(true)
					cancel()
				}
				return err
			}
		}
		return ctx.Err()
	}
	w.Log.Info("job started", "job", j.ID, "kind", j.Kind, "attempt", j.Attempts, "worker", w.Name)
	outcome, err := w.call(ctx, h, j, progress)
	close(stop)
	wg.Wait()

	// The job's own context may be cancelled; record the end on a fresh one.
	rctx, rcancel := context.WithTimeout(context.WithoutCancel(parent), 10*time.Second)
	defer rcancel()
	switch {
	case lost.Load():
		w.Log.Warn("job taken over by another worker", "job", j.ID, "worker", w.Name)
		return fmt.Errorf("db: job %d: %w", j.ID, ErrJobLost)
	case parent.Err() != nil:
		w.Log.Info("job handed back at shutdown", "job", j.ID)
		return w.Store.ReleaseJob(rctx, j.ID, w.Name)
	case errors.As(err, new(later)):
		var l later
		errors.As(err, &l)
		w.Log.Info("job deferred", "job", j.ID, "until", l.at, "why", l.why)
		return w.Store.DeferJob(rctx, j.ID, w.Name, l.at, l.why)
	case err != nil:
		var p permanent
		retry := !errors.As(err, &p)
		final, ferr := w.Store.FailJob(rctx, j.ID, w.Name, err.Error(), retry, w.Backoff(j.Attempts))
		w.Log.Warn("job attempt failed", "job", j.ID, "attempt", j.Attempts, "final", final, "err", err)
		return ferr
	}
	w.Log.Info("job done", "job", j.ID, "outcome", outcome)
	return w.Store.CompleteJob(rctx, j.ID, w.Name, outcome)
}

// call runs the handler, turning a panic into an error so one bad job cannot
// stop the worker.
func (w *Worker) call(ctx context.Context, h JobFunc, j Job, progress func(done, total int64) error) (outcome string, err error) {
	defer func() {
		if r := recover(); r != nil {
			w.Log.Error("job panicked", "job", j.ID, "panic", r, "stack", string(debug.Stack()))
			err = fmt.Errorf("internal error: %v", r)
		}
	}()
	if h == nil {
		return "", Permanent(fmt.Errorf("no handler for job kind %q", j.Kind))
	}
	return h(ctx, j, progress)
}

// RunWorkers runs n workers (at least 1) over the same handlers until ctx
// ends, and returns when all have stopped.
func RunWorkers(ctx context.Context, s *Store, n int, handlers map[string]JobFunc, log *slog.Logger) {
	if n < 1 {
		n = 1
	}
	var wg sync.WaitGroup
	for range n {
		w := &Worker{Store: s, Handlers: handlers, Log: log}
		wg.Go(func() { _ = w.Run(ctx) })
	}
	wg.Wait()
}
