package db

// Reads past one machine: pages that only read may go to a hot standby, a
// copy of the primary kept current by PostgreSQL's streaming replication.
// The web layer marks such requests (ReadFromStandby); the store sends their
// reads to the standby while it is reachable and close behind the primary,
// and otherwise to the primary, counting why. Writes always go to the
// primary, and so do a person's reads until the standby has replayed their
// own last write (the primary's WAL position after it, kept in the session).

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
	"time"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgconn"
	"github.com/jackc/pgx/v5/pgxpool"
)

// Standby is a hot standby the store may read from.
type Standby struct {
	pool    *pgxpool.Pool
	primary *pgxpool.Pool
	maxLag  time.Duration
	every   time.Duration
	log     *slog.Logger

	up       atomic.Bool   // reachable, in recovery, and lag <= maxLag
	replayed atomic.Uint64 // the WAL position it has replayed, at the last check
	lagNanos atomic.Int64  // its lag at the last check
	reason   atomic.Value  // string: why it is not used, "" when it is

	// What the store did with reads marked for the standby.
	Reads     atomic.Int64 // sent to the standby
	Fallbacks sync.Map     // reason (string) -> *atomic.Int64: sent to the primary instead

	mu      sync.Mutex
	samples []lsnSample // the primary's WAL position over the last lags
	lastLog time.Time
	everUp  bool // used at least once (only the monitor's goroutine touches it)
}

type lsnSample struct {
	at  time.Time
	lsn uint64
}

// The reasons a read marked for the standby went to the primary.
const (
	FallbackDown  = "down"      // the standby cannot be reached or is not a standby
	FallbackLag   = "lag"       // it lags the primary by more than the setting
	FallbackError = "error"     // a read on it failed as it went away; read again on the primary
	FallbackOwn   = "own_write" // it has not replayed this person's last write yet
)

// StandbyOptions set how the store uses a standby.
type StandbyOptions struct {
	MaxLag time.Duration // reads fall back to the primary beyond this lag (default 2 s)
	Every  time.Duration // how often its lag is measured (default 250 ms)
	Log    *slog.Logger
}

// UseStandby makes the store read marked requests from the standby behind
// pool and starts measuring its lag until ctx ends. The standby is not used
// until its first measurement says it may be.
func (s *Store) UseStandby(ctx context.Context, pool *pgxpool.Pool, o StandbyOptions) *Standby {
	if o.MaxLag <= 0 {
		o.MaxLag = 2 * time.Second
	}
	if o.Every <= 0 {
		o.Every = 250 * time.Millisecond
	}
	if o.Log == nil {
		o.Log = slog.New(slog.DiscardHandler)
	}
	sb := &Standby{pool: pool, primary: s.pool, maxLag: o.MaxLag, every: o.Every, log: o.Log}
	sb.reason.Store("not measured yet")
	s.standby = sb
	sb.check(ctx)
	go func() {
		t := time.NewTicker(sb.every)
		defer t.Stop()
		for {
			select {
			case <-ctx.Done():
				return
			case <-t.C:
				sb.check(ctx)
			}
		}
	}()
	return sb
}

// Standby returns the standby in use, nil without one.
func (s *Store) Standby() *Standby { return s.standby }

// Lag is the standby's lag at the last measurement.
func (sb *Standby) Lag() time.Duration { return time.Duration(sb.lagNanos.Load()) }

// Up reports whether reads go to the standby now.
func (sb *Standby) Up() bool { return sb.up.Load() }

// FallbackCount is how many marked reads went to the primary for reason.
func (sb *Standby) FallbackCount(reason string) int64 {
	if v, ok := sb.Fallbacks.Load(reason); ok {
		return v.(*atomic.Int64).Load()
	}
	return 0
}

func (sb *Standby) fellBack(reason string) {
	v, _ := sb.Fallbacks.LoadOrStore(reason, new(atomic.Int64))
	v.(*atomic.Int64).Add(1)
}

// check measures the standby: the primary's WAL position now, the position
// the standby has replayed, and from the primary's recent positions how far
// behind that is in time.
func (sb *Standby) check(ctx context.Context) {
	cctx, cancel := context.WithTimeout(ctx, sb.every*4+time.Second)
	defer cancel()
	now := time.Now()
	var plsn string
	perr := sb.primary.QueryRow(cctx, `SELECT pg_current_wal_lsn()::text`).Scan(&plsn)
	var rlsn *string
	var recovering bool
	err := sb.pool.QueryRow(cctx, `SELECT pg_is_in_recovery(), pg_last_wal_replay_lsn()::text`).Scan(&recovering, &rlsn)
	switch {
	case err != nil:
		sb.set(false, FallbackDown, fmt.Sprintf("cannot reach the standby: %v", err), 0)
		return
	case !recovering || rlsn == nil:
		sb.set(false, FallbackDown, "the read database is not a standby in recovery", 0)
		return
	case perr != nil:
		// The primary is away: nothing to measure against; the standby's
		// data is as current as anything can be.
		return
	}
	p, r := parseLSN(plsn), parseLSN(*rlsn)
	sb.replayed.Store(r)
	sb.mu.Lock()
	sb.samples = append(sb.samples, lsnSample{now, p})
	// The lag is the age of the newest primary position the standby has
	// not replayed yet: everything written before it is on the standby.
	var lag time.Duration
	for _, smp := range sb.samples {
		if smp.lsn > r {
			lag = now.Sub(smp.at)
			break
		}
	}
	keep := 0
	for i, smp := range sb.samples {
		if smp.lsn <= r && i < len(sb.samples)-1 {
			keep = i // older positions, already replayed, are not needed
		}
	}
	sb.samples = sb.samples[keep:]
	if len(sb.samples) > 10000 {
		sb.samples = sb.samples[len(sb.samples)-10000:]
	}
	sb.mu.Unlock()
	if lag > sb.maxLag {
		sb.set(false, FallbackLag, fmt.Sprintf("the standby lags the primary by %s (limit %s)", lag.Round(time.Millisecond), sb.maxLag), lag)
		return
	}
	sb.set(true, "", "", lag)
}

// set records the standby's state, logging each change.
func (sb *Standby) set(up bool, reason, why string, lag time.Duration) {
	sb.lagNanos.Store(int64(lag))
	was := sb.up.Swap(up)
	old, _ := sb.reason.Load().(string)
	sb.reason.Store(reason)
	switch {
	case up && !was && !sb.everUp:
		sb.everUp = true
		sb.log.Info("reads go to the standby", "lag", lag.Round(time.Millisecond).String())
	case up && !was:
		sb.log.Info("reads go to the standby again", "lag", lag.Round(time.Millisecond).String())
	case !up && (was || old != reason):
		sb.log.Warn("reads fall back to the primary", "reason", reason, "detail", why)
	}
}

// failed marks the standby unusable after a read on it failed as it went
// away; the monitor brings it back once it answers again.
func (sb *Standby) failed(err error) {
	sb.fellBack(FallbackError)
	was := sb.up.Swap(false)
	sb.reason.Store(FallbackDown)
	sb.mu.Lock()
	quiet := time.Since(sb.lastLog) < time.Second
	if !quiet {
		sb.lastLog = time.Now()
	}
	sb.mu.Unlock()
	if was || !quiet {
		sb.log.Warn("reads fall back to the primary", "reason", FallbackError, "detail", "a read on the standby failed; it is read again on the primary: "+err.Error())
	}
}

// parseLSN reads a WAL position written as two hexadecimal halves "X/Y".
func parseLSN(s string) uint64 {
	hi, lo, ok := strings.Cut(s, "/")
	if !ok {
		return 0
	}
	h, err1 := strconv.ParseUint(hi, 16, 32)
	l, err2 := strconv.ParseUint(lo, 16, 32)
	if err1 != nil || err2 != nil {
		return 0
	}
	return h<<32 | l
}

// PrimaryPosition is the primary's WAL position now, as text: the web layer
// keeps it in a person's session after they change something, so their next
// reads wait for the standby to replay it (ReadFromStandby).
func (s *Store) PrimaryPosition(ctx context.Context) (string, error) {
	var lsn string
	err := s.pool.QueryRow(ctx, `SELECT pg_current_wal_lsn()::text`).Scan(&lsn)
	return lsn, mapErr("primary position", err)
}

type standbyKey struct{}

// ReadFromStandby marks ctx as a request that only reads and may read from
// the standby, once the standby has replayed the WAL position after (from
// PrimaryPosition; "" for none).
func ReadFromStandby(ctx context.Context, after string) context.Context {
	return context.WithValue(ctx, standbyKey{}, parseLSN(after))
}

// readsFromStandby reports whether ctx's reads go to the standby now.
func (s *Store) readsFromStandby(ctx context.Context) bool {
	sb := s.standby
	if sb == nil {
		return false
	}
	after, marked := ctx.Value(standbyKey{}).(uint64)
	switch {
	case !marked:
		return false
	case !sb.up.Load():
		r, _ := sb.reason.Load().(string)
		if r == "" {
			r = FallbackDown
		}
		sb.fellBack(r)
		return false
	case after > sb.replayed.Load():
		sb.fellBack(FallbackOwn)
		return false
	}
	sb.Reads.Add(1)
	return true
}

// standbyGone reports whether err says the standby went away (or was never
// there) rather than that the read was wrong.
func standbyGone(err error) bool {
	if err == nil || errors.Is(err, context.Canceled) || errors.Is(err, context.DeadlineExceeded) {
		return false
	}
	var pg *pgconn.PgError
	if errors.As(err, &pg) && pg.Code == "40001" {
		return true // canceled on the standby by a conflict with recovery
	}
	return Unavailable(err)
}

// standbyQuerier reads from the standby and, when a read fails because the
// standby went away, reads again from the primary.
type standbyQuerier struct{ s *Store }

func (q standbyQuerier) Query(ctx context.Context, sql string, args ...any) (pgx.Rows, error) {
	rows, err := q.s.standby.pool.Query(ctx, sql, args...)
	if standbyGone(err) {
		q.s.standby.failed(err)
		return q.s.pool.Query(ctx, sql, args...)
	}
	return rows, err
}

func (q standbyQuerier) QueryRow(ctx context.Context, sql string, args ...any) pgx.Row {
	return fallbackRow{q: q, ctx: ctx, sql: sql, args: args}
}

// fallbackRow scans a row from the standby, or from the primary when the
// standby went away.
type fallbackRow struct {
	q    standbyQuerier
	ctx  context.Context
	sql  string
	args []any
}

func (r fallbackRow) Scan(dest ...any) error {
	err := r.q.s.standby.pool.QueryRow(r.ctx, r.sql, r.args...).Scan(dest...)
	if standbyGone(err) {
		r.q.s.standby.failed(err)
		return r.q.s.pool.QueryRow(r.ctx, r.sql, r.args...).Scan(dest...)
	}
	return err
}
