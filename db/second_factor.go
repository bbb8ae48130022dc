package db

import (
	"context"
	"fmt"

	"cohortdesk/cohort"

	"github.com/jackc/pgx/v5"
)

// SecondFactorState is an account's second factor.
type SecondFactorState struct {
	Enabled      bool
	Sealed       string // the sealed TOTP secret
	LastStep     int64
	RecoveryLeft int
}

// SecondFactor returns the account's second factor (Enabled false when none).
func (s *Store) SecondFactor(ctx context.Context, userID int64) (SecondFactorState, error) {
	var st SecondFactorState
	err := s.pool.QueryRow(ctx, `SELECT f.secret_sealed, f.last_step,
		(SELECT count(*) FROM recovery_codes c WHERE c.user_id = f.user_id AND c.used_at IS NULL)
		FROM second_factors f WHERE f.user_id = $1`, userID).Scan(&st.Sealed, &st.LastStep, &st.RecoveryLeft)
	if err == pgx.ErrNoRows {
		return SecondFactorState{}, nil
	}
	if err != nil {
		return st, mapErr("second factor", err)
	}
	st.Enabled = true
	return st, nil
}

// RecoveryCodeHash is a stored recovery code: its id and the hash of its
// secret part.
type RecoveryCodeHash struct {
	ID   string
	Hash string
}

// EnableSecondFactor stores the account's confirmed TOTP secret, the step of
// the code that confirmed it, and a new set of recovery codes (the old ones
// end), and audits it.
func (s *Store) EnableSecondFactor(ctx context.Context, a cohort.Actor, sealed string, step int64, codes []RecoveryCodeHash) error {
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		if _, err := tx.Exec(ctx, `INSERT INTO second_factors (user_id, secret_sealed, last_step, enabled_at) VALUES ($1, $2, $3, $4)
			ON CONFLICT (user_id) DO UPDATE SET secret_sealed = EXCLUDED.secret_sealed, last_step = EXCLUDED.last_step, enabled_at = EXCLUDED.enabled_at`,
			a.UserID, sealed, step, s.now()); err != nil {
			return err
		}
		if _, err := tx.Exec(ctx, `DELETE FROM recovery_codes WHERE user_id = $1`, a.UserID); err != nil {
			return err
		}
		for _, c := range codes {
			if _, err := tx.Exec(ctx, `INSERT INTO recovery_codes (user_id, code_id, code_hash) VALUES ($1, $2, $3)`, a.UserID, c.ID, c.Hash); err != nil {
				return err
			}
		}
		return audit(ctx, tx, a, "user.second_factor_on", "user", fmt.Sprint(a.UserID), nil, map[string]int{"recovery_codes": len(codes)})
	})
	return mapErr("enable second factor", err)
}

// UseTOTPStep accepts the code of step for the account once: true when step
// is later than every step accepted before (one statement, so two requests
// with the same code cannot both pass).
func (s *Store) UseTOTPStep(ctx context.Context, userID, step int64) (bool, error) {
	tag, err := s.pool.Exec(ctx, `UPDATE second_factors SET last_step = $2 WHERE user_id = $1 AND last_step < $2`, userID, step)
	if err != nil {
		return false, mapErr("use code", err)
	}
	return tag.RowsAffected() == 1, nil
}

// RecoveryCode returns the hash of the account's unused recovery code id
// (ErrNotFound when there is none).
func (s *Store) RecoveryCode(ctx context.Context, userID int64, id string) (string, error) {
	var h string
	err := s.pool.QueryRow(ctx, `SELECT code_hash FROM recovery_codes WHERE user_id = $1 AND code_id = $2 AND used_at IS NULL`, userID, id).Scan(&h)
	return h, mapErr("recovery code", err)
}

// UseRecoveryCode marks the code used, once, and audits it: true when this
// call used it.
func (s *Store) UseRecoveryCode(ctx context.Context, a cohort.Actor, id string) (bool, error) {
	var used bool
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		tag, err := tx.Exec(ctx, `UPDATE recovery_codes SET used_at = $3 WHERE user_id = $1 AND code_id = $2 AND used_at IS NULL`, a.UserID, id, s.now())
		if err != nil {
			return err
		}
		if used = tag.RowsAffected() == 1; !used {
			return nil
		}
		return audit(ctx, tx, a, "user.recovery_code_used", "user", fmt.Sprint(a.UserID), nil, nil)
	})
	return used, mapErr("use recovery code", err)
}

// ResetSecondFactor removes an account's second factor and recovery codes (a
// lost phone), ends its sessions, and audits it. An account whose role needs
// one sets up a new one at its next sign-in.
func (s *Store) ResetSecondFactor(ctx context.Context, a cohort.Actor, userID int64) error {
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		if _, err := tx.Exec(ctx, `DELETE FROM recovery_codes WHERE user_id = $1`, userID); err != nil {
			return err
		}
		tag, err := tx.Exec(ctx, `DELETE FROM second_factors WHERE user_id = $1`, userID)
		if err != nil {
			return err
		}
		if tag.RowsAffected() == 0 {
			return pgx.ErrNoRows
		}
		if err := endSessions(ctx, tx, userID); err != nil {
			return err
		}
		return audit(ctx, tx, a, "user.second_factor_reset", "user", fmt.Sprint(userID), nil, nil)
	})
	return mapErr("reset second factor", err)
}

// SecondFactorRequired says whether roles that see identifying details must
// use a second factor.
func (s *Store) SecondFactorRequired(ctx context.Context) (bool, error) {
	var req bool
	err := s.pool.QueryRow(ctx, `SELECT second_factor_required FROM sign_in_policy WHERE id = 1`).Scan(&req)
	if err == pgx.ErrNoRows {
		return true, nil
	}
	return req, mapErr("sign-in policy", err)
}

// SetSecondFactorRequired changes the rule and audits it.
func (s *Store) SetSecondFactorRequired(ctx context.Context, a cohort.Actor, required bool) error {
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		var old bool
		if err := tx.QueryRow(ctx, `INSERT INTO sign_in_policy (id) VALUES (1) ON CONFLICT (id) DO UPDATE SET id = 1
			RETURNING second_factor_required`).Scan(&old); err != nil {
			return err
		}
		if _, err := tx.Exec(ctx, `UPDATE sign_in_policy SET second_factor_required = $1, updated_at = now() WHERE id = 1`, required); err != nil {
			return err
		}
		return audit(ctx, tx, a, "study.second_factor_rule", "study", "1",
			map[string]bool{"required": old}, map[string]bool{"required": required})
	})
	return mapErr("set sign-in policy", err)
}

// SecondFactorUsers is the set of accounts that have a second factor.
func (s *Store) SecondFactorUsers(ctx context.Context) (map[int64]bool, error) {
	rows, err := s.pool.Query(ctx, `SELECT user_id FROM second_factors`)
	if err != nil {
		return nil, mapErr("second factors", err)
	}
	ids, err := pgx.CollectRows(rows, pgx.RowTo[int64])
	if err != nil {
		return nil, mapErr("second factors", err)
	}
	out := make(map[int64]bool, len(ids))
	for _, id := range ids {
		out[id] = true
	}
	return out, nil
}
