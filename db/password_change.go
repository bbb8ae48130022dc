package db

import (
	"context"
	"fmt"

	"cohortdesk/cohort"

	"github.com/jackc/pgx/v5"
)

// endSessions deletes every session of the account (the session data holds
// its marker).
func endSessions(ctx context.Context, tx pgx.Tx, id int64) error {
	_, err := tx.Exec(ctx, `DELETE FROM sessions WHERE position(convert_to($1, 'UTF8') in data) > 0`, sessionMarker(id))
	return err
}

// ChangeOwnPassword stores the password the account's owner chose (the web
// layer has checked the current one and the policy), lifts the duty to change
// it, ends the account's other sessions and audits the change.
func (s *Store) ChangeOwnPassword(ctx context.Context, a cohort.Actor, hash string) error {
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		tag, err := tx.Exec(ctx, `UPDATE users SET password_hash = $2, must_change_password = false, password_changed_at = $3,
			version = version + 1, updated_at = now() WHERE id = $1 AND active`, a.UserID, hash, s.now())
		if err != nil {
			return err
		}
		if tag.RowsAffected() == 0 {
			return pgx.ErrNoRows
		}
		if err := endSessions(ctx, tx, a.UserID); err != nil {
			return err
		}
		return audit(ctx, tx, a, "user.password_changed", "user", fmt.Sprint(a.UserID), nil, nil)
	})
	return mapErr("change password", err)
}
