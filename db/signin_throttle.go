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
}

// Admission is the answer to an attempt.
type Admission struct {
	OK         bool
	RetryAfter time.Duration // when refused: until the last of the locks ends
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
		states, err := lockThrottle(ctx, tx, keys)
		if err != nil {
			return err
		}
		next := make([]credential.ThrottleState, len(keys))
		adm.OK = true
		for i, k := range keys {
			var ok bool
			next[i], ok = k.Rule.Admit(states[i], now)
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

// RefundAttempt takes back an admitted attempt on these keys: it was not
// tried (the server was busy) or it succeeded on a key that several people
// share (an address).
func (s *Store) RefundAttempt(ctx context.Context, keys []ThrottleKey) error {
	keys = sortedKeys(keys)
	now := s.now()
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		states, err := lockThrottle(ctx, tx, keys)
		if err != nil {
			return err
		}
		for i, k := range keys {
			if err := saveThrottle(ctx, tx, k.Key, k.Rule.Refund(states[i]), now); err != nil {
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

// lockThrottle makes sure every key has a row and locks them all, in order.
func lockThrottle(ctx context.Context, tx pgx.Tx, keys []ThrottleKey) ([]credential.ThrottleState, error) {
	names := make([]string, len(keys))
	for i, k := range keys {
		names[i] = k.Key
	}
	if _, err := tx.Exec(ctx, `INSERT INTO sign_in_throttle (key) SELECT unnest($1::text[]) ORDER BY 1 ON CONFLICT (key) DO NOTHING`, names); err != nil {
		return nil, err
	}
	rows, err := tx.Query(ctx, `SELECT key, failures, last_failure_at, locked_until FROM sign_in_throttle
		WHERE key = ANY($1) ORDER BY key FOR UPDATE`, names)
	if err != nil {
		return nil, err
	}
	byKey := map[string]credential.ThrottleState{}
	for rows.Next() {
		var k string
		var st credential.ThrottleState
		var last, until *time.Time
		if err := rows.Scan(&k, &st.Failures, &last, &until); err != nil {
			rows.Close()
			return nil, err
		}
		if last != nil {
			st.LastFailure = *last
		}
		if until != nil {
			st.LockedUntil = *until
		}
		byKey[k] = st
	}
	if err := rows.Err(); err != nil {
		return nil, err
	}
	out := make([]credential.ThrottleState, len(keys))
	for i, k := range keys {
		out[i] = byKey[k.Key]
	}
	return out, nil
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
