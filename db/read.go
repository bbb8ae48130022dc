package db

import (
	"context"

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
