package db

import (
	"context"
	"errors"
	"fmt"
	"sync"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgxpool"
)

// reader is where a read may go: the standby for a request marked
// ReadFromStandby while the standby may serve it (a single read that fails
// as the standby goes away is read again on the primary), else the primary.
func (s *Store) reader(ctx context.Context) querier {
	if s.readsFromStandby(ctx) {
		return standbyQuerier{s}
	}
	return s.pool
}

// readPool is the pool reads of ctx go to.
func (s *Store) readPool(ctx context.Context) *pgxpool.Pool {
	if s.readsFromStandby(ctx) {
		return s.standby.pool
	}
	return s.pool
}

// readBatch sends a batch of reads where they may go and hands its results
// to fn. A batch that fails as the standby goes away marks the standby down
// and returns the error: the web layer answers the request again from the
// primary (StandbyGone).
func (s *Store) readBatch(ctx context.Context, b *pgx.Batch, fn func(pgx.BatchResults) error) error {
	p := s.readPool(ctx)
	br := p.SendBatch(ctx, b)
	err := fn(br)
	if cerr := br.Close(); err == nil {
		err = cerr
	}
	if s.standby != nil && p == s.standby.pool && standbyGone(err) {
		s.standby.failed(err)
		err = fmt.Errorf("%w: %w", ErrStandbyGone, err)
	}
	return err
}

// ErrStandbyGone marks a read that failed because the standby went away in
// the middle of it; the request may be answered again from the primary.
var ErrStandbyGone = errors.New("the standby went away during a read")

// StandbyGone reports whether a request that read from the standby failed
// because the standby went away, so it may be answered again from the
// primary.
func StandbyGone(err error) bool { return errors.Is(err, ErrStandbyGone) || standbyGone(err) }

// readTx runs fn in a read-only, repeatable-read transaction where reads
// may go.
func (s *Store) readTx(ctx context.Context, fn func(pgx.Tx) error) error {
	p := s.readPool(ctx)
	err := pgx.BeginTxFunc(ctx, p, pgx.TxOptions{AccessMode: pgx.ReadOnly, IsoLevel: pgx.RepeatableRead}, fn)
	if s.standby != nil && p == s.standby.pool && standbyGone(err) {
		s.standby.failed(err)
		err = fmt.Errorf("%w: %w", ErrStandbyGone, err)
	}
	return err
}

// memo holds what one request reads that does not change while it runs
// (the study's settings, its sites, the active protocol version), so a page
// that needs them in several places reads them once.
type memo struct {
	mu   sync.Mutex
	vals map[string]any
}

type memoKey struct{}

// WithReadMemo marks ctx as one request that only reads: the study's
// settings, sites and active protocol are read once under it. The web layer
// gives it to GET requests; a request that changes something must not have
// it (it would read its own change's old values).
func WithReadMemo(ctx context.Context) context.Context {
	return context.WithValue(ctx, memoKey{}, &memo{vals: map[string]any{}})
}

// remember returns the value read under key in this request, reading it
// with read the first time.
func remember[T any](ctx context.Context, key string, read func() (T, error)) (T, error) {
	m, ok := ctx.Value(memoKey{}).(*memo)
	if !ok {
		return read()
	}
	m.mu.Lock()
	v, ok := m.vals[key]
	m.mu.Unlock()
	if ok {
		return v.(T), nil
	}
	t, err := read()
	if err == nil {
		m.mu.Lock()
		m.vals[key] = t
		m.mu.Unlock()
	}
	return t, err
}
