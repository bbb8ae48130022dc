package db

import (
	"context"
	"sync/atomic"
	"time"

	"github.com/jackc/pgx/v5"
)

// Calls counts the database round trips made on behalf of one piece of work
// (a request) and the time spent waiting for them: a query, an Exec, a batch
// of queries sent together and a COPY each count once. Attach one to a
// context with WithCalls; every pool opened by Open counts into it.
type Calls struct {
	n     atomic.Int64
	nanos atomic.Int64
}

// Count is the round trips so far.
func (c *Calls) Count() int64 { return c.n.Load() }

// Time is the time spent in them so far (summed; calls made side by side
// each count their own time).
func (c *Calls) Time() time.Duration { return time.Duration(c.nanos.Load()) }

type callsKey struct{}
type startKey struct{}

// WithCalls returns a context whose database calls are counted in c.
func WithCalls(ctx context.Context, c *Calls) context.Context {
	return context.WithValue(ctx, callsKey{}, c)
}

// Totals counts round trips, for the metrics.
type Totals struct {
	Calls atomic.Int64
	Nanos atomic.Int64
}

// AllCalls counts every round trip of every pool Open opened in this process.
var AllCalls Totals

// tracer counts round trips into the context's Calls and into totals.
type tracer struct{ totals *Totals }

func (t tracer) start(ctx context.Context) context.Context {
	return context.WithValue(ctx, startKey{}, time.Now())
}

func (t tracer) end(ctx context.Context) {
	start, ok := ctx.Value(startKey{}).(time.Time)
	if !ok {
		return
	}
	d := time.Since(start)
	if c, ok := ctx.Value(callsKey{}).(*Calls); ok {
		c.n.Add(1)
		c.nanos.Add(int64(d))
	}
	if t.totals != nil {
		t.totals.Calls.Add(1)
		t.totals.Nanos.Add(int64(d))
	}
}

func (t tracer) TraceQueryStart(ctx context.Context, _ *pgx.Conn, _ pgx.TraceQueryStartData) context.Context {
	return t.start(ctx)
}

func (t tracer) TraceQueryEnd(ctx context.Context, _ *pgx.Conn, _ pgx.TraceQueryEndData) { t.end(ctx) }

func (t tracer) TraceBatchStart(ctx context.Context, _ *pgx.Conn, _ pgx.TraceBatchStartData) context.Context {
	return t.start(ctx)
}

func (t tracer) TraceBatchQuery(context.Context, *pgx.Conn, pgx.TraceBatchQueryData) {}

func (t tracer) TraceBatchEnd(ctx context.Context, _ *pgx.Conn, _ pgx.TraceBatchEndData) { t.end(ctx) }

func (t tracer) TraceCopyFromStart(ctx context.Context, _ *pgx.Conn, _ pgx.TraceCopyFromStartData) context.Context {
	return t.start(ctx)
}

func (t tracer) TraceCopyFromEnd(ctx context.Context, _ *pgx.Conn, _ pgx.TraceCopyFromEndData) {
	t.end(ctx)
}
