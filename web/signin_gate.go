package web

import (
	"context"
	"errors"
	"runtime"
	"sync/atomic"
	"time"

	"cohortdesk/cohort/credential"
)

// errHashBusy means every password-hashing slot is taken and the queue is
// full (or the wait ran out): the answer is 503 with Retry-After.
var errHashBusy = errors.New("password hashing busy")

// hashGate bounds the password hashes computed at once. Each argon2id hash
// holds its memory cost (64 MiB by default) while it runs, so without a bound
// a flood of sign-ins takes the server's memory and every CPU. With it, at
// most `slots` hashes run, at most `queue` more wait (each for at most
// `wait`), and the rest are told at once to come back: memory stays near
// slots x the memory cost whatever the flood.
type hashGate struct {
	slots   chan struct{}
	waiting atomic.Int64
	queue   int64
	wait    time.Duration
}

// newHashGate sizes the gate: n slots (0 means one per CPU the Go scheduler
// uses), a queue of twice that, waits of up to 3 s.
func newHashGate(n int) *hashGate {
	if n <= 0 {
		n = runtime.GOMAXPROCS(0)
	}
	return &hashGate{slots: make(chan struct{}, n), queue: int64(2 * n), wait: 3 * time.Second}
}

// run computes fn in a slot. A caller that must not be refused (an
// administrator's action) passes patient, and waits as long as ctx lets it.
func (g *hashGate) run(ctx context.Context, patient bool, fn func()) error {
	select {
	case g.slots <- struct{}{}:
	default:
		if !patient && g.waiting.Add(1) > g.queue {
			g.waiting.Add(-1)
			return errHashBusy
		} else if !patient {
			defer g.waiting.Add(-1)
		}
		var timeout <-chan time.Time
		if !patient {
			t := time.NewTimer(g.wait)
			defer t.Stop()
			timeout = t.C
		}
		select {
		case g.slots <- struct{}{}:
		case <-timeout:
			return errHashBusy
		case <-ctx.Done():
			return ctx.Err()
		}
	}
	defer func() { <-g.slots }()
	fn()
	return nil
}

// hashPassword hashes a new password in a gate slot, waiting as long as the
// request may (an administrator's action is not refused as busy).
func (s *Server) hashPassword(ctx context.Context, pw string) (string, error) {
	var hash string
	var herr error
	if err := s.hashes.run(ctx, true, func() { hash, herr = credential.Hash(pw, s.pwParams) }); err != nil {
		return "", err
	}
	return hash, herr
}
