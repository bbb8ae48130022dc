// Package db is cohortdesk's PostgreSQL store: one Store over a pgx pool, one
// file per aggregate, raw SQL beside each method. Exported methods own their
// transaction; unexported (ctx, tx) helpers do the work inside it.
package db

import (
	"context"
	"errors"
	"fmt"
	"io"
	"net"
	"strings"
	"syscall"
	"time"

	"cohortdesk/cohort"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgconn"
	"github.com/jackc/pgx/v5/pgxpool"
)

// Store is the application's access to PostgreSQL.
type Store struct {
	pool    *pgxpool.Pool
	standby *Standby // nil: every read goes to the primary
	now     func() time.Time
}

// New wraps a pool. now is the clock; nil means time.Now.
func New(pool *pgxpool.Pool, now func() time.Time) *Store {
	if now == nil {
		now = time.Now
	}
	return &Store{pool: pool, now: now}
}

// Pool exposes the pool for migrations and tests.
func (s *Store) Pool() *pgxpool.Pool { return s.pool }

// Open connects a pool to url and checks that the server answers.
func Open(ctx context.Context, url string, maxConns int32) (*pgxpool.Pool, error) {
	cfg, err := pgxpool.ParseConfig(url)
	if err != nil {
		return nil, fmt.Errorf("db: database URL: %w", err)
	}
	if maxConns > 0 {
		cfg.MaxConns = maxConns
	}
	cfg.ConnConfig.RuntimeParams["application_name"] = "cohortdesk"
	cfg.ConnConfig.RuntimeParams["timezone"] = "UTC"
	// JIT compilation pays off for long analytic queries, not for the app's
	// short ones: on the bench's 20,000-participant study it added about
	// 0.6 s to the progress page's queries (sufficiency 0.7 -> 1.3 s, silent
	// participants 0.04 -> 0.37 s), compiling plans whose cost estimates
	// crossed jit_above_cost.
	cfg.ConnConfig.RuntimeParams["jit"] = "off"
	cfg.ConnConfig.Tracer = tracer{totals: &AllCalls}
	pool, err := pgxpool.NewWithConfig(ctx, cfg)
	if err != nil {
		return nil, fmt.Errorf("db: %w", err)
	}
	pctx, cancel := context.WithTimeout(ctx, 10*time.Second)
	defer cancel()
	if err := pool.Ping(pctx); err != nil {
		pool.Close()
		return nil, fmt.Errorf("db: cannot reach the database: %w", err)
	}
	return pool, nil
}

// Ping reports whether the database answers, for the readiness check.
func (s *Store) Ping(ctx context.Context) error {
	ctx, cancel := context.WithTimeout(ctx, 2*time.Second)
	defer cancel()
	var one int
	if err := s.pool.QueryRow(ctx, "SELECT 1").Scan(&one); err != nil {
		return fmt.Errorf("db: ping: %w", err)
	}
	return nil
}

// inTx runs fn in a transaction, committing when fn returns nil. Before the
// commit it computes the kept figures of the participants whose rows fn
// changed (figures_keep.go), so the change and its figures commit together.
func (s *Store) inTx(ctx context.Context, fn func(pgx.Tx) error) error {
	return pgx.BeginFunc(ctx, s.pool, func(tx pgx.Tx) error {
		if err := fn(tx); err != nil {
			return err
		}
		return refreshMarked(ctx, tx)
	})
}

// mapErr turns driver errors into the domain's errors so callers never look at
// pgx types: no rows becomes ErrNotFound, unique and exclusion violations
// ErrConflict, a read-only or full database a clear message.
func mapErr(op string, err error) error {
	if err == nil {
		return nil
	}
	if errors.Is(err, pgx.ErrNoRows) {
		return fmt.Errorf("db: %s: %w", op, cohort.ErrNotFound)
	}
	var pg *pgconn.PgError
	if errors.As(err, &pg) {
		switch pg.Code {
		case "23505", "23P01":
			return fmt.Errorf("db: %s: %s: %w", op, pg.Detail, cohort.ErrConflict)
		case "25006":
			return fmt.Errorf("db: %s: the database is read-only: %w", op, ErrUnavailable)
		case "53100", "53200":
			return fmt.Errorf("db: %s: the database is out of space or memory: %w", op, ErrUnavailable)
		}
	}
	if Unavailable(err) {
		return fmt.Errorf("db: %s: the database is unreachable (%v): %w", op, err, ErrUnavailable)
	}
	return fmt.Errorf("db: %s: %w", op, err)
}

// ErrUnavailable means the database cannot take changes now (read-only, full)
// or cannot be reached at all.
var ErrUnavailable = errors.New("database unavailable for changes")

// Unavailable reports whether err says the database cannot serve at the
// moment rather than that the request was wrong: ErrUnavailable itself, a
// read-only or full database, a server shutting down or starting up, or a
// connection that could not be made or was lost. The web layer answers these
// with 503 instead of 500, and they pass once the database is back.
func Unavailable(err error) bool {
	if err == nil {
		return false
	}
	if errors.Is(err, ErrUnavailable) {
		return true
	}
	if errors.Is(err, context.Canceled) || errors.Is(err, context.DeadlineExceeded) {
		return false // the caller gave up; that says nothing about the database
	}
	var pg *pgconn.PgError
	if errors.As(err, &pg) {
		switch {
		case pg.Code == "25006", pg.Code == "53100", pg.Code == "53200":
			return true
		case strings.HasPrefix(pg.Code, "08"), strings.HasPrefix(pg.Code, "57P"):
			// connection exceptions; admin shutdown, crash shutdown, cannot
			// connect now (starting up or shutting down)
			return true
		}
		return false
	}
	var ce *pgconn.ConnectError
	var ne net.Error
	return errors.As(err, &ce) || errors.As(err, &ne) || errors.Is(err, io.ErrUnexpectedEOF) ||
		errors.Is(err, syscall.ECONNREFUSED) || errors.Is(err, syscall.ECONNRESET)
}
