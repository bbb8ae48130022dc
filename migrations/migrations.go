// Package migrations holds the database schema as forward-only SQL files and
// applies them. Each file runs in its own transaction; a PostgreSQL advisory lock
// keeps two instances that start together from racing.
package migrations

import (
	"context"
	"database/sql"
	"embed"
	"fmt"
	"io/fs"

	"github.com/jackc/pgx/v5/pgxpool"
	"github.com/jackc/pgx/v5/stdlib"
	"github.com/pressly/goose/v3"
	"github.com/pressly/goose/v3/lock"
)

//go:embed *.sql
var files embed.FS

// FS is the embedded migration files, for tests that apply part of the
// sequence (up to a version) before checking what a later file does.
func FS() fs.FS { return files }

// Status is one migration and whether it has been applied.
type Status struct {
	Version int64
	Name    string
	Applied bool
}

func provider(db *sql.DB) (*goose.Provider, error) {
	locker, err := lock.NewPostgresSessionLocker()
	if err != nil {
		return nil, fmt.Errorf("migrations: %w", err)
	}
	p, err := goose.NewProvider(goose.DialectPostgres, db, files, goose.WithSessionLocker(locker))
	if err != nil {
		return nil, fmt.Errorf("migrations: %w", err)
	}
	return p, nil
}

func open(pool *pgxpool.Pool) *sql.DB { return stdlib.OpenDBFromPool(pool) }

// Up applies every pending migration and returns how many ran.
func Up(ctx context.Context, pool *pgxpool.Pool) (int, error) {
	db := open(pool)
	defer db.Close()
	p, err := provider(db)
	if err != nil {
		return 0, err
	}
	res, err := p.Up(ctx)
	if err != nil {
		return len(res), fmt.Errorf("migrations: %w", err)
	}
	return len(res), nil
}

// List reports every known migration and whether it is applied.
func List(ctx context.Context, pool *pgxpool.Pool) ([]Status, error) {
	db := open(pool)
	defer db.Close()
	p, err := provider(db)
	if err != nil {
		return nil, err
	}
	st, err := p.Status(ctx)
	if err != nil {
		return nil, fmt.Errorf("migrations: %w", err)
	}
	out := make([]Status, len(st))
	for i, s := range st {
		out[i] = Status{Version: s.Source.Version, Name: s.Source.Path, Applied: s.State == goose.StateApplied}
	}
	return out, nil
}
