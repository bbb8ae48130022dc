package db

import (
	"context"
	"slices"
	"time"

	"cohortdesk/cohort/credential"

	"github.com/jackc/pgx/v5"
)

// ThrottleKey is one thing an attempt counts against, with its rule: an
// account ("account:<e-mail>"), a client address ("address:<ip>"), a trusted
// device ("device:<id>") or an account's second-factor codes ("code:<id>").
type ThrottleKey struct {
	Key  string
	Rule credential.Throttle
	// Shared keys (an address, which an office behind one gateway shares)
	// are only checked when an attempt is admitted and counted afterwards,
	// for failures only (CountFailure): counting every attempt in flight
	// would pause a busy office's right passwords for a moment. The limit on
	// them may be overshot by the attempts in flight at once (bounded by the
	// hashing gate), which is enough against spraying.
	Shared bool
}

// Admission is the answer to an attempt.
type Admission struct {
	OK         bool
	RetryAfter time.Duration // when refused: until the last of the locks ends
	before     []throttleRow // the keys' rows before, for UndoAttempt
}

// throttleRow is a key's stored row as it was.
type throttleRow struct {
	key     string
	existed bool
	state   credential.ThrottleState
	refused int64
	updated time.Time
}

// AdmitAttempt decides an attempt against every key at once, atomically: the
// keys' rows are locked (in key order, so concurrent attempts never deadlock)
// and either the attempt is counted against all of them (as a failure, until
// RefundAttempt or ClearThrottle takes it back) or, when any key is locked,
// it is refused and only the locked keys' refusal counters move. So 40
// parallel guesses at one account cannot get more tries than its rule
// allows, and refused attempts never extend a lock.
func (s *Store) AdmitAttempt(ctx context.Context, keys []ThrottleKey) (Admission, error) {
	keys = sortedKeys(keys)
	now := s.now()
	var adm Admission
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		rows, err := lockThrottle(ctx, tx, keys)
		if err != nil {
			return err
		}
		adm.before = rows
		states := make([]credential.ThrottleState, len(rows))
		for i, r := range rows {
			states[i] = r.state
		}
		next := make([]credential.ThrottleState, len(keys))
		adm.OK = true
		for i, k := range keys {
			var ok bool
			next[i], ok = k.Rule.Admit(states[i], now)
			if k.Shared {
				next[i] = states[i]
			}
			if !ok {
				adm.OK = false
				adm.RetryAfter = max(adm.RetryAfter, states[i].LockedUntil.Sub(now))
			}
		}
		if !adm.OK {
			for i, k := range keys {
				if now.Before(states[i].LockedUntil) {
					if _, err := tx.Exec(ctx, `UPDATE sign_in_throttle SET refused = refused + 1, updated_at = $2 WHERE key = $1`, k.Key, now); err != nil {
						return err
					}
				}
			}
			return nil
		}
		for i, k := range keys {
			if err := saveThrottle(ctx, tx, k.Key, next[i], now); err != nil {
				return err
			}
		}
		return nil
	})
	if err != nil {
		return Admission{}, mapErr("admit sign-in attempt", err)
	}
	return adm, nil
}

// CountFailure counts a failed attempt against the shared keys among keys
// (see ThrottleKey.Shared); the others were counted on admission.
func (s *Store) CountFailure(ctx context.Context, keys []ThrottleKey) error {
	var shared []ThrottleKey
	for _, k := range keys {
		if k.Shared {
			shared = append(shared, k)
		}
	}
	if len(shared) == 0 {
		return nil
	}
	shared = sortedKeys(shared)
	now := s.now()
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		rows, err := lockThrottle(ctx, tx, shared)
		if err != nil {
			return err
		}
		for i, k := range shared {
			next, _ := k.Rule.Admit(credential.ThrottleState{Failures: rows[i].state.Failures, LastFailure: rows[i].state.LastFailure}, now)
			if rows[i].state.LockedUntil.After(next.LockedUntil) {
				next.LockedUntil = rows[i].state.LockedUntil
			}
			if err := saveThrottle(ctx, tx, k.Key, next, now); err != nil {
				return err
			}
		}
		return nil
	})
	return mapErr("count sign-in failure", err)
}

// RefundAttempt takes back an admitted attempt on these keys: it was not
// tried (the server was busy) or it succeeded on a key that several people
// share (an address).
func (s *Store) RefundAttempt(ctx context.Context, keys []ThrottleKey) error {
	keys = sortedKeys(keys)
	now := s.now()
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		rows, err := lockThrottle(ctx, tx, keys)
		if err != nil {
			return err
		}
		for i, k := range keys {
			if err := saveThrottle(ctx, tx, k.Key, k.Rule.Refund(rows[i].state), now); err != nil {
				return err
			}
		}
		return nil
	})
	return mapErr("refund sign-in attempt", err)
}

// ClearThrottle forgets the failures of keys that belong to one person (an
// account, a device) once that person has signed in: NIST SP 800-63B
// section 5.2.2 has earlier failures disregarded after a success.
func (s *Store) ClearThrottle(ctx context.Context, keys ...string) error {
	_, err := s.pool.Exec(ctx, `DELETE FROM sign_in_throttle WHERE key = ANY($1)`, keys)
	return mapErr("clear sign-in throttle", err)
}

// ThrottleRow is a key's stored state, for tests and the administrator.
type ThrottleRow struct {
	Key         string
	Failures    int
	LockedUntil *time.Time
	Refused     int64
}

// Throttled returns the state of one key; a key never seen is all zero.
func (s *Store) Throttled(ctx context.Context, key string) (ThrottleRow, error) {
	r := ThrottleRow{Key: key}
	err := s.pool.QueryRow(ctx, `SELECT failures, locked_until, refused FROM sign_in_throttle WHERE key = $1`, key).
		Scan(&r.Failures, &r.LockedUntil, &r.Refused)
	if err == pgx.ErrNoRows {
		return r, nil
	}
	return r, mapErr("sign-in throttle", err)
}

func sortedKeys(keys []ThrottleKey) []ThrottleKey {
	keys = slices.Clone(keys)
	slices.SortFunc(keys, func(a, b ThrottleKey) int {
		switch {
		case a.Key < b.Key:
			return -1
		case a.Key > b.Key:
			return 1
		}
		return 0
	})
	return slices.CompactFunc(keys, func(a, b ThrottleKey) bool { return a.Key == b.Key })
}

// lockThrottle makes sure every key has a row and locks them all, in order,
// returning them as they were.
func lockThrottle(ctx context.Context, tx pgx.Tx, keys []ThrottleKey) ([]throttleRow, error) {
	names := make([]string, len(keys))
	for i, k := range keys {
		names[i] = k.Key
	}
	rows, err := tx.Query(ctx, `INSERT INTO sign_in_throttle (key) SELECT unnest($1::text[]) ORDER BY 1 ON CONFLICT (key) DO NOTHING RETURNING key`, names)
	if err != nil {
		return nil, err
	}
	created, err := pgx.CollectRows(rows, pgx.RowTo[string])
	if err != nil {
		return nil, err
	}
	rows, err = tx.Query(ctx, `SELECT key, failures, last_failure_at, locked_until, refused, updated_at FROM sign_in_throttle
		WHERE key = ANY($1) ORDER BY key FOR UPDATE`, names)
	if err != nil {
		return nil, err
	}
	byKey := map[string]throttleRow{}
	for rows.Next() {
		var r throttleRow
		var last, until *time.Time
		if err := rows.Scan(&r.key, &r.state.Failures, &last, &until, &r.refused, &r.updated); err != nil {
			rows.Close()
			return nil, err
		}
		if last != nil {
			r.state.LastFailure = *last
		}
		if until != nil {
			r.state.LockedUntil = *until
		}
		r.existed = !slices.Contains(created, r.key)
		byKey[r.key] = r
	}
	if err := rows.Err(); err != nil {
		return nil, err
	}
	out := make([]throttleRow, len(keys))
	for i, k := range keys {
		out[i] = byKey[k.Key]
	}
	return out, nil
}

// UndoAttempt puts the keys of an admitted attempt back as they were before
// it, when the attempt could not be finished because the database refused a
// later write (read-only, full): a request answered "nothing was changed"
// changes nothing, not even a counter.
func (s *Store) UndoAttempt(ctx context.Context, adm Admission) error {
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		for _, r := range adm.before {
			if !r.existed {
				if _, err := tx.Exec(ctx, `DELETE FROM sign_in_throttle WHERE key = $1`, r.key); err != nil {
					return err
				}
				continue
			}
			var last, until *time.Time
			if !r.state.LastFailure.IsZero() {
				last = &r.state.LastFailure
			}
			if !r.state.LockedUntil.IsZero() {
				until = &r.state.LockedUntil
			}
			if _, err := tx.Exec(ctx, `INSERT INTO sign_in_throttle AS t (key, failures, last_failure_at, locked_until, refused, updated_at)
				VALUES ($1, $2, $3, $4, $5, $6)
				ON CONFLICT (key) DO UPDATE SET failures = EXCLUDED.failures, last_failure_at = EXCLUDED.last_failure_at,
				locked_until = EXCLUDED.locked_until, refused = EXCLUDED.refused, updated_at = EXCLUDED.updated_at`,
				r.key, r.state.Failures, last, until, r.refused, r.updated); err != nil {
				return err
			}
		}
		return nil
	})
	return mapErr("undo sign-in attempt", err)
}

func saveThrottle(ctx context.Context, tx pgx.Tx, key string, st credential.ThrottleState, now time.Time) error {
	var last, until *time.Time
	if !st.LastFailure.IsZero() {
		last = &st.LastFailure
	}
	if !st.LockedUntil.IsZero() {
		until = &st.LockedUntil
	}
	_, err := tx.Exec(ctx, `UPDATE sign_in_throttle SET failures = $2, last_failure_at = $3, locked_until = $4, updated_at = $5 WHERE key = $1`,
		key, st.Failures, last, until, now)
	return err
}
