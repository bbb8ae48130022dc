package web

import (
	"context"
	"crypto/sha256"
	"errors"
	"sync"
	"time"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgxpool"
)

// sessionStore keeps sessions in PostgreSQL (table sessions), shared by every
// app instance, for scs. It always uses the primary: a session is written on
// one request and read on the next.
//
// With an idle timeout, scs saves the session after every request only to
// move its expiry on: one write and one commit per page view. The store
// skips that write when the session's data is unchanged and the expiry it
// last wrote is less than refresh old, so a busy user's session is written
// about once per refresh; the idle timeout then ends a session at most
// refresh early. Changed data (signing in, signing out) is always written.
type sessionStore struct {
	pool    *pgxpool.Pool
	refresh time.Duration

	mu      sync.Mutex
	written map[string]writtenSession // what this instance last wrote, by token
}

type writtenSession struct {
	sum    [32]byte
	expiry time.Time
}

func newSessionStore(pool *pgxpool.Pool, idle time.Duration) *sessionStore {
	return &sessionStore{pool: pool, refresh: idle / 30, written: map[string]writtenSession{}}
}

// FindCtx returns the data of an unexpired session.
func (st *sessionStore) FindCtx(ctx context.Context, token string) ([]byte, bool, error) {
	var b []byte
	err := st.pool.QueryRow(ctx, `SELECT data FROM sessions WHERE token = $1 AND current_timestamp < expiry`, token).Scan(&b)
	if errors.Is(err, pgx.ErrNoRows) {
		return nil, false, nil
	}
	if err != nil {
		return nil, false, err
	}
	return b, true, nil
}

// CommitCtx saves a session unless only its expiry moved, and by less than
// the refresh interval since this instance last wrote it.
func (st *sessionStore) CommitCtx(ctx context.Context, token string, b []byte, expiry time.Time) error {
	sum := sha256.Sum256(b)
	st.mu.Lock()
	last, ok := st.written[token]
	st.mu.Unlock()
	if ok && last.sum == sum && expiry.Sub(last.expiry) < st.refresh && !expiry.Before(last.expiry) {
		return nil
	}
	if _, err := st.pool.Exec(ctx, `INSERT INTO sessions (token, data, expiry) VALUES ($1, $2, $3)
		ON CONFLICT (token) DO UPDATE SET data = EXCLUDED.data, expiry = EXCLUDED.expiry`, token, b, expiry); err != nil {
		return err
	}
	st.mu.Lock()
	st.written[token] = writtenSession{sum: sum, expiry: expiry}
	st.mu.Unlock()
	return nil
}

// DeleteCtx removes a session.
func (st *sessionStore) DeleteCtx(ctx context.Context, token string) error {
	st.mu.Lock()
	delete(st.written, token)
	st.mu.Unlock()
	_, err := st.pool.Exec(ctx, `DELETE FROM sessions WHERE token = $1`, token)
	return err
}

// The context-free methods scs also asks for.
func (st *sessionStore) Find(token string) ([]byte, bool, error) {
	return st.FindCtx(context.Background(), token)
}

func (st *sessionStore) Commit(token string, b []byte, expiry time.Time) error {
	return st.CommitCtx(context.Background(), token, b, expiry)
}

func (st *sessionStore) Delete(token string) error { return st.DeleteCtx(context.Background(), token) }

// cleanup deletes expired sessions now and then, and forgets them here.
func (st *sessionStore) cleanup(ctx context.Context, every time.Duration) {
	t := time.NewTicker(every)
	defer t.Stop()
	for {
		select {
		case <-ctx.Done():
			return
		case <-t.C:
		}
		_, _ = st.pool.Exec(ctx, `DELETE FROM sessions WHERE expiry < current_timestamp`)
		now := time.Now()
		st.mu.Lock()
		for tok, w := range st.written {
			if w.expiry.Before(now) {
				delete(st.written, tok)
			}
		}
		st.mu.Unlock()
	}
}
