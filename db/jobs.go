package db

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"time"

	"github.com/jackc/pgx/v5"
)

// The states of a background job.
const (
	JobQueued  = "queued"  // waiting for a worker (again, after a failed attempt)
	JobRunning = "running" // a worker holds it and renews its lease
	JobDone    = "done"
	JobFailed  = "failed" // out of attempts, or failed in a way a retry cannot mend
)

// ErrJobLost means the worker no longer holds the job: its lease ran out and
// another worker took it over. The worker must stop working on it.
var ErrJobLost = errors.New("job lease lost to another worker")

// Job is one unit of background work in the PostgreSQL-backed queue.
type Job struct {
	ID          int64
	Kind        string
	Label       string
	Payload     json.RawMessage
	State       string
	Attempts    int
	MaxAttempts int
	RunAfter    time.Time
	LockedBy    string
	LeaseUntil  *time.Time
	Done        int64 // progress: units finished
	Total       int64 // progress: units in all, 0 when not yet known
	Error       string
	Outcome     string
	CreatedBy   string
	CreatedAt   time.Time
	StartedAt   *time.Time
	FinishedAt  *time.Time
}

// NewJob describes work to enqueue.
type NewJob struct {
	Kind        string
	Label       string // in words, for the progress page
	Payload     any    // marshalled to JSON
	MaxAttempts int    // 0 means 3
	CreatedBy   string
	RunAfter    time.Time // not before this moment; zero: now
}

const jobCols = `id, kind, label, payload, state, attempts, max_attempts, run_after, locked_by, lease_until,
	progress_done, progress_total, error, outcome, created_by, created_at, started_at, finished_at`

// jobFields are the scan destinations of jobCols, in order.
func jobFields(j *Job) []any {
	return []any{&j.ID, &j.Kind, &j.Label, &j.Payload, &j.State, &j.Attempts, &j.MaxAttempts, &j.RunAfter, &j.LockedBy,
		&j.LeaseUntil, &j.Done, &j.Total, &j.Error, &j.Outcome, &j.CreatedBy, &j.CreatedAt, &j.StartedAt, &j.FinishedAt}
}

func scanJob(row pgx.Row) (Job, error) {
	var j Job
	err := row.Scan(jobFields(&j)...)
	return j, err
}

// Enqueue adds a job to the queue and returns its id.
func (s *Store) Enqueue(ctx context.Context, j NewJob) (int64, error) {
	var id int64
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		var err error
		id, err = enqueue(ctx, tx, j)
		return err
	})
	return id, mapErr("enqueue job", err)
}

// enqueue adds a job inside the caller's transaction, so work and the job that
// follows it up commit together.
func enqueue(ctx context.Context, tx pgx.Tx, j NewJob) (int64, error) {
	if j.Kind == "" {
		return 0, errors.New("job kind is empty")
	}
	if j.MaxAttempts <= 0 {
		j.MaxAttempts = 3
	}
	payload, err := json.Marshal(j.Payload)
	if err != nil {
		return 0, fmt.Errorf("job payload: %w", err)
	}
	var id int64
	err = tx.QueryRow(ctx, `INSERT INTO jobs (kind, label, payload, max_attempts, created_by, run_after)
		VALUES ($1, $2, $3, $4, $5, coalesce($6::timestamptz, clock_timestamp())) RETURNING id`,
		j.Kind, j.Label, payload, j.MaxAttempts, j.CreatedBy, timeArg(j.RunAfter)).Scan(&id)
	return id, err
}

// ClaimJob takes the oldest job that is due (queued and past its run_after, or
// running under a lease that ran out because its worker died) for worker, with
// a lease of the given length, and reports whether there was one. kinds limits
// the job kinds taken (nil: any); only, when not 0, limits the claim to that one
// job. Rows are taken with FOR UPDATE SKIP LOCKED, so any number of workers in
// any number of app instances can claim at once and each job goes to one.
// Leases are measured on the database's clock, which every instance shares.
func (s *Store) ClaimJob(ctx context.Context, worker string, lease time.Duration, kinds []string, only int64) (Job, bool, error) {
	// A job whose worker died on its last attempt is failed, not retried.
	if _, err := s.pool.Exec(ctx, `
		UPDATE jobs SET state = 'failed', finished_at = clock_timestamp(), lease_until = NULL,
		       error = format('attempt %s of %s: worker %s stopped renewing its lease (it crashed or lost the database); no attempts left',
		                      attempts, max_attempts, locked_by)
		WHERE id IN (SELECT id FROM jobs WHERE state = 'running' AND lease_until < clock_timestamp() AND attempts >= max_attempts
		             FOR UPDATE SKIP LOCKED)`); err != nil {
		return Job{}, false, mapErr("claim job", err)
	}
	j, err := scanJob(s.pool.QueryRow(ctx, `
		UPDATE jobs j SET state = 'running', attempts = j.attempts + 1, locked_by = $1, locked_at = clock_timestamp(),
		       lease_until = clock_timestamp() + $2 * interval '1 millisecond',
		       started_at = coalesce(j.started_at, clock_timestamp()),
		       error = CASE WHEN j.state = 'running'
		                    THEN format('attempt %s: worker %s stopped renewing its lease; taken over', j.attempts, j.locked_by)
		                    ELSE j.error END
		FROM (SELECT id FROM jobs
		      WHERE ((state = 'queued' AND run_after <= clock_timestamp()) OR (state = 'running' AND lease_until < clock_timestamp()))
		        AND ($3::text[] IS NULL OR kind = ANY($3))
		        AND ($4::bigint = 0 OR id = $4)
		      ORDER BY id LIMIT 1
		      FOR UPDATE SKIP LOCKED) c
		WHERE j.id = c.id
		RETURNING `+prefixCols("j.", jobCols), worker, lease.Milliseconds(), kinds, only))
	if errors.Is(err, pgx.ErrNoRows) {
		return Job{}, false, nil
	}
	if err != nil {
		return Job{}, false, mapErr("claim job", err)
	}
	return j, true, nil
}

// RenewJob extends the worker's lease on a running job; ErrJobLost when the
// worker no longer holds it.
func (s *Store) RenewJob(ctx context.Context, id int64, worker string, lease time.Duration) error {
	return s.heldJob(ctx, "renew job", `UPDATE jobs SET lease_until = clock_timestamp() + $3 * interval '1 millisecond'
		WHERE id = $1 AND locked_by = $2 AND state = 'running'`, id, worker, lease.Milliseconds())
}

// JobProgress records how far a running job has got and renews its lease.
func (s *Store) JobProgress(ctx context.Context, id int64, worker string, done, total int64, lease time.Duration) error {
	return s.heldJob(ctx, "job progress", `UPDATE jobs SET progress_done = $4, progress_total = $5,
		lease_until = clock_timestamp() + $3 * interval '1 millisecond'
		WHERE id = $1 AND locked_by = $2 AND state = 'running'`, id, worker, lease.Milliseconds(), done, total)
}

// CompleteJob marks the worker's job done with a short outcome.
func (s *Store) CompleteJob(ctx context.Context, id int64, worker, outcome string) error {
	return s.heldJob(ctx, "complete job", `UPDATE jobs SET state = 'done', finished_at = clock_timestamp(), lease_until = NULL, outcome = $3
		WHERE id = $1 AND locked_by = $2 AND state = 'running'`, id, worker, outcome)
}

// FailJob records a failed attempt. With attempts left (and retry set) the job
// goes back to the queue to run again after retryAfter; otherwise it fails for
// good. It reports whether the failure is final. The message is kept either way.
func (s *Store) FailJob(ctx context.Context, id int64, worker, msg string, retry bool, retryAfter time.Duration) (bool, error) {
	var state string
	err := s.pool.QueryRow(ctx, `
		UPDATE jobs SET
		  state = CASE WHEN $4 AND attempts < max_attempts THEN 'queued' ELSE 'failed' END,
		  run_after = clock_timestamp() + $5 * interval '1 millisecond',
		  finished_at = CASE WHEN $4 AND attempts < max_attempts THEN NULL ELSE clock_timestamp() END,
		  locked_by = '', lease_until = NULL,
		  error = format('attempt %s of %s: %s', attempts, max_attempts, $3::text)
		WHERE id = $1 AND locked_by = $2 AND state = 'running'
		RETURNING state`, id, worker, msg, retry, retryAfter.Milliseconds()).Scan(&state)
	if errors.Is(err, pgx.ErrNoRows) {
		return false, fmt.Errorf("db: fail job %d: %w", id, ErrJobLost)
	}
	if err != nil {
		return false, mapErr("fail job", err)
	}
	return state == JobFailed, nil
}

// DeferJob hands a job back to the queue to run again at at, without
// counting the attempt, keeping why as its last message: the job itself
// decided to wait (a message held until the participant's quiet hours end,
// or a retry it schedules itself).
func (s *Store) DeferJob(ctx context.Context, id int64, worker string, at time.Time, why string) error {
	return s.heldJob(ctx, "defer job", `UPDATE jobs SET state = 'queued', attempts = greatest(attempts - 1, 0), locked_by = '',
		lease_until = NULL, run_after = $3, error = $4
		WHERE id = $1 AND locked_by = $2 AND state = 'running'`, id, worker, at, why)
}

// ReleaseJob hands a job back to the queue without counting the attempt, for a
// worker that is shutting down cleanly in the middle of it.
func (s *Store) ReleaseJob(ctx context.Context, id int64, worker string) error {
	return s.heldJob(ctx, "release job", `UPDATE jobs SET state = 'queued', attempts = greatest(attempts - 1, 0), locked_by = '',
		lease_until = NULL, run_after = clock_timestamp()
		WHERE id = $1 AND locked_by = $2 AND state = 'running'`, id, worker)
}

func (s *Store) heldJob(ctx context.Context, op, sql string, args ...any) error {
	tag, err := s.pool.Exec(ctx, sql, args...)
	if err != nil {
		return mapErr(op, err)
	}
	if tag.RowsAffected() == 0 {
		return fmt.Errorf("db: %s %v: %w", op, args[0], ErrJobLost)
	}
	return nil
}

// Jobs lists the most recent jobs, newest first, leaving out the outbox's
// own (one per message, and the morning summary), whose state the outbox
// page shows per message.
func (s *Store) Jobs(ctx context.Context, limit int) ([]Job, error) {
	if limit <= 0 || limit > 1000 {
		limit = 50
	}
	rows, err := s.reader(ctx).Query(ctx, `SELECT `+jobCols+` FROM jobs WHERE kind <> ALL($2) ORDER BY id DESC LIMIT $1`,
		limit, []string{JobSendMessage, JobMorningSummary})
	if err != nil {
		return nil, mapErr("jobs", err)
	}
	out, err := pgx.CollectRows(rows, func(r pgx.CollectableRow) (Job, error) { return scanJob(r) })
	return out, mapErr("jobs", err)
}

// Job returns one job.
func (s *Store) Job(ctx context.Context, id int64) (Job, error) {
	j, err := scanJob(s.reader(ctx).QueryRow(ctx, `SELECT `+jobCols+` FROM jobs WHERE id = $1`, id))
	return j, mapErr("job", err)
}

// prefixCols qualifies a comma-separated column list with a table alias.
func prefixCols(prefix, cols string) string {
	out := make([]byte, 0, len(cols)*2)
	start := true
	for i := 0; i < len(cols); i++ {
		c := cols[i]
		if start && c != ' ' && c != '\n' && c != '\t' {
			out = append(out, prefix...)
			start = false
		}
		out = append(out, c)
		if c == ',' {
			start = true
		}
	}
	return string(out)
}

// QueueState is the job queue at one moment, for the metrics.
type QueueState struct {
	Queued, Running int
	// OldestQueued is how long the oldest queued job has waited to be due
	// (0 with none).
	OldestQueued time.Duration
}

// Queue reads the job queue's depth and age from its partial indexes.
func (s *Store) Queue(ctx context.Context) (QueueState, error) {
	var q QueueState
	var oldest float64
	err := s.pool.QueryRow(ctx, `
		SELECT (SELECT count(*) FROM jobs WHERE state = 'queued'), (SELECT count(*) FROM jobs WHERE state = 'running'),
		       coalesce((SELECT extract(epoch FROM clock_timestamp() - min(run_after)) FROM jobs WHERE state = 'queued' AND run_after <= clock_timestamp()), 0)`).
		Scan(&q.Queued, &q.Running, &oldest)
	q.OldestQueued = time.Duration(oldest * float64(time.Second))
	return q, mapErr("job queue", err)
}
