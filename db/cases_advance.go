package db

import (
	"context"
	"strings"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"

	"github.com/jackc/pgx/v5"
)

// Moves the system makes: the consequences of a step recorded elsewhere (a
// withdrawal, a recording, an over-read, a referral). Whoever caused them did
// not edit the case, so they apply to whatever version the case is at.

// CloseCasesForWithdrawal closes every case of the participant that is still
// being worked as "closed (withdrawn)", each audited. It is the system's
// consequence of a recorded withdrawal, so it applies to whatever version the
// cases are at.
func (s *Store) CloseCasesForWithdrawal(ctx context.Context, a cohort.Actor, participantID int64) (int, error) {
	n := 0
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		rows, err := tx.Query(ctx, `SELECT id FROM cases WHERE participant_id = $1 AND closed_at IS NULL ORDER BY id`, participantID)
		if err != nil {
			return err
		}
		ids, err := pgx.CollectRows(rows, pgx.RowTo[int64])
		if err != nil {
			return err
		}
		for _, id := range ids {
			_, err := s.editCase(ctx, tx, a, id, anyVersion, caseEdit{
				action: followup.EditWithdrawn,
				intent: followup.SetState(followup.ClosedWithdrawn),
				apply: func(ctx context.Context, tx pgx.Tx, cur Case, next *Case, rec *caseSnapshot) error {
					if err := followup.Move(cur.State, followup.ClosedWithdrawn); err != nil {
						return err
					}
					next.enter(followup.ClosedWithdrawn, s.now())
					next.ClosingNote = followup.WithdrawnNote
					return nil
				},
			})
			if err != nil {
				return err
			}
			n++
		}
		return nil
	})
	if err != nil {
		return 0, mapCaseErr("close cases after withdrawal", err)
	}
	return n, nil
}

// AdvanceCase moves a case as the consequence of a step recorded elsewhere
// (a recording uploaded, an interpretable over-read entered, a referral
// issued), whatever version the case is at: whoever caused it did not edit the
// case, so there is no stale copy to refuse. A case already in to is left as
// it is; a move the state table does not allow is refused with the allowed
// states named, as for people. at is when the step happened (zero: now);
// a final state needs a reason. Audited as "case.advance".
func (s *Store) AdvanceCase(ctx context.Context, a cohort.Actor, id int64, to followup.State, at time.Time, reason string) (Case, error) {
	var out Case
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		var err error
		out, err = s.advanceCase(ctx, tx, a, id, to, at, reason)
		return err
	})
	if err != nil {
		return Case{}, mapCaseErr("advance case", err)
	}
	return out, nil
}

// advanceCase is AdvanceCase inside the caller's transaction, so a step
// recorded elsewhere (a recording stored, an over-read entered) and the move
// it causes commit or fail together.
func (s *Store) advanceCase(ctx context.Context, tx pgx.Tx, a cohort.Actor, id int64, to followup.State, at time.Time, reason string) (Case, error) {
	cur, err := lockCase(ctx, tx, id)
	if err != nil {
		return Case{}, err
	}
	if cur.State == to {
		return cur, nil
	}
	reason = strings.TrimSpace(reason)
	return s.editCase(ctx, tx, a, id, anyVersion, caseEdit{
		action: followup.EditAdvance,
		intent: followup.SetState(to),
		apply: func(ctx context.Context, tx pgx.Tx, cur Case, next *Case, rec *caseSnapshot) error {
			if err := followup.CheckMove(cur.State, to, reason, false); err != nil {
				return err
			}
			when := at
			if when.IsZero() {
				when = s.now()
			}
			next.enter(to, when)
			if to.Terminal() {
				next.ClosingNote = reason
			}
			rec.reason = reason
			return nil
		},
	})
}
