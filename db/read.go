package db

import (
	"context"
	"sync"

	"github.com/jackc/pgx/v5"
)

// reader is where a read may go.
func (s *Store) reader(ctx context.Context) querier { return s.pool }

// readBatch sends a batch of reads and hands its results to fn.
func (s *Store) readBatch(ctx context.Context, b *pgx.Batch, fn func(pgx.BatchResults) error) error {
	br := s.pool.SendBatch(ctx, b)
	err := fn(br)
	if cerr := br.Close(); err == nil {
		err = cerr
	}
	return err
}

// readTx runs fn in a read-only, repeatable-read transaction where reads
// may go.
func (s *Store) readTx(ctx context.Context, fn func(pgx.Tx) error) error {
	return pgx.BeginTxFunc(ctx, s.pool, pgx.TxOptions{AccessMode: pgx.ReadOnly, IsoLevel: pgx.RepeatableRead}, fn)
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
