package db

import (
	"context"
	"errors"
	"strings"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"

	"github.com/jackc/pgx/v5"
)

// The edits people make to one case. Each names the version the person saw
// and runs through the edit engine (editCase); the rules each one checks are
// followup's.

// AssignCase gives the case to a person (ownerID 0: to nobody). The person
// must have an active account whose role works cases.
func (s *Store) AssignCase(ctx context.Context, a cohort.Actor, id int64, version int, ownerID int64) (Case, error) {
	return s.oneCaseEdit(ctx, a, id, version, s.assignEdit(s.userName(ctx, ownerID), ownerID, false))
}

// userName is the display name of an account, "" when unknown; it only words
// conflict messages, so a failed read is not an error.
func (s *Store) userName(ctx context.Context, id int64) string {
	var name string
	if id != 0 {
		_ = s.pool.QueryRow(ctx, `SELECT display_name FROM users WHERE id = $1`, id).Scan(&name)
	}
	return name
}

// assignEdit gives a case to ownerID; name is that person's name as the
// caller knows it, for the conflict message.
func (s *Store) assignEdit(name string, ownerID int64, bulk bool) caseEdit {
	return caseEdit{
		action: followup.EditAssign,
		step:   followup.StepAssign,
		intent: followup.SetOwner(name),
		apply: func(ctx context.Context, tx pgx.Tx, cur Case, next *Case, rec *caseSnapshot) error {
			rec.Bulk = bulk
			if ownerID == 0 {
				next.OwnerID, next.Owner = 0, ""
				return nil
			}
			u, err := caseWorker(ctx, tx, ownerID)
			if err != nil {
				return err
			}
			next.OwnerID, next.Owner = u.ID, u.Name
			return nil
		},
	}
}

// caseWorker reads the account a case is given to, refused as
// followup.CheckOwner says.
func caseWorker(ctx context.Context, tx pgx.Tx, id int64) (User, error) {
	rows, err := tx.Query(ctx, `SELECT `+userCols+` FROM users WHERE id = $1`, id)
	if err != nil {
		return User{}, err
	}
	u, err := pgx.CollectExactlyOneRow(rows, scanUser)
	switch {
	case errors.Is(err, pgx.ErrNoRows):
		return User{}, followup.CheckOwner(false, "")
	case err != nil:
		return User{}, err
	}
	return u, followup.CheckOwner(u.Active, u.Role)
}

// CaseWorkers lists the active accounts a case may be assigned to, by name.
func (s *Store) CaseWorkers(ctx context.Context) ([]User, error) {
	var roles []string
	for _, r := range followup.CaseWorkerRoles() {
		roles = append(roles, string(r))
	}
	rows, err := s.reader(ctx).Query(ctx, `SELECT `+userCols+` FROM users WHERE active AND role = ANY($1) ORDER BY display_name, id`, roles)
	if err != nil {
		return nil, mapErr("case workers", err)
	}
	out, err := pgx.CollectRows(rows, scanUser)
	return out, mapErr("case workers", err)
}

// AttemptInput is a contact attempt as a person enters it.
type AttemptInput struct {
	Version int
	Channel followup.Channel
	Outcome followup.Outcome
	Note    string
	At      time.Time // when it was made; zero: now
}

// LogAttempt records a contact attempt and moves the case as
// followup.AfterAttempt says (reached, declined, first attempt).
func (s *Store) LogAttempt(ctx context.Context, a cohort.Actor, id int64, in AttemptInput) (Case, error) {
	e := followup.AttemptEntry{Channel: in.Channel, Outcome: in.Outcome, Note: strings.TrimSpace(in.Note), At: in.At}
	return s.oneCaseEdit(ctx, a, id, in.Version, s.attemptEdit(a, e, false))
}

func (s *Store) attemptEdit(a cohort.Actor, e followup.AttemptEntry, bulk bool) caseEdit {
	return caseEdit{
		action: followup.EditAttempt,
		step:   followup.StepAttempt,
		intent: followup.LogAttempt(e.Outcome),
		apply: func(ctx context.Context, tx pgx.Tx, cur Case, next *Case, rec *caseSnapshot) error {
			st, err := studySettings(ctx, tx)
			if err != nil {
				return err
			}
			if err := e.Check(cur.FlaggedAt, s.now(), st.Location()); err != nil {
				return err
			}
			at := e.At
			if at.IsZero() {
				at = s.now()
			}
			to, move, err := followup.AfterAttempt(cur.State, e.Outcome)
			if err != nil {
				return err
			}
			moved := ""
			if move {
				if err := followup.Move(cur.State, to); err != nil {
					return err
				}
				next.enter(to, at)
				if e.Outcome == followup.OutcomeReached {
					next.ReachedAt = at
				}
				if to.Terminal() {
					next.ClosingNote = e.ClosingNote()
				}
				moved = string(to)
			}
			var actorID *int64
			if a.UserID != 0 {
				actorID = &a.UserID
			}
			r := &attemptRecord{At: at.UTC(), Channel: string(e.Channel), Outcome: string(e.Outcome)}
			if err := tx.QueryRow(ctx, `
				INSERT INTO contact_attempts (case_id, participant_id, at, channel, outcome, note, moved_to, actor_id, actor)
				VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9) RETURNING id`,
				cur.ID, cur.ParticipantID, at, string(e.Channel), string(e.Outcome), e.Note, moved, actorID, a.Label()).Scan(&r.ID); err != nil {
				return err
			}
			r.NoteRef = freeText("contact_attempts", r.ID, "note", e.Note)
			rec.Attempt, rec.Bulk = r, bulk
			return nil
		},
	}
}

// MoveInput is a requested change of state.
type MoveInput struct {
	Version int
	To      followup.State
	Reason  string // required when the new state is final
}

// MoveCase changes the state as the state table allows; a refused move's
// message names the allowed next states. Reaching a step records its time.
func (s *Store) MoveCase(ctx context.Context, a cohort.Actor, id int64, in MoveInput) (Case, error) {
	return s.oneCaseEdit(ctx, a, id, in.Version, s.moveEdit(followup.EditMove, in, false))
}

// CloseCase ends a case in one of the final states, with the reason.
func (s *Store) CloseCase(ctx context.Context, a cohort.Actor, id int64, in MoveInput) (Case, error) {
	return s.oneCaseEdit(ctx, a, id, in.Version, s.moveEdit(followup.EditClose, in, true))
}

func (s *Store) moveEdit(action followup.Edit, in MoveInput, closing bool) caseEdit {
	reason := strings.TrimSpace(in.Reason)
	return caseEdit{
		action: action,
		intent: followup.SetState(in.To),
		apply: func(ctx context.Context, tx pgx.Tx, cur Case, next *Case, rec *caseSnapshot) error {
			if err := followup.CheckHandMove(cur.State, in.To, reason, closing); err != nil {
				return err
			}
			next.enter(in.To, s.now())
			if in.To.Terminal() {
				next.ClosingNote = reason
			}
			rec.reason = reason
			return nil
		},
	}
}

// RecordShipment records that the recorder went out (the day, the tracking
// number) and moves the case to "recorder sent": from "reached", or from
// "recording received" for a repeat. On a case already in "recorder sent" it
// corrects the day and tracking number.
func (s *Store) RecordShipment(ctx context.Context, a cohort.Actor, id int64, version int, sentOn cohort.Date, tracking string) (Case, error) {
	tracking = strings.TrimSpace(tracking)
	return s.oneCaseEdit(ctx, a, id, version, caseEdit{
		action: followup.EditShipment,
		step:   followup.StepShipment,
		intent: followup.SetState(followup.RecorderSent),
		apply: func(ctx context.Context, tx pgx.Tx, cur Case, next *Case, rec *caseSnapshot) error {
			st, err := studySettings(ctx, tx)
			if err != nil {
				return err
			}
			loc := st.Location()
			if err := followup.CheckShipment(sentOn, tracking, cur.ReachedAt, s.now(), loc); err != nil {
				return err
			}
			next.enter(followup.RecorderSent, s.now())
			next.RecorderSentAt, next.TrackingNumber = followup.StepTime(sentOn, s.now(), loc), tracking
			return nil
		},
	})
}

// RecordReturn records the day the recording came back and moves the case to
// "recording received".
func (s *Store) RecordReturn(ctx context.Context, a cohort.Actor, id int64, version int, backOn cohort.Date) (Case, error) {
	return s.oneCaseEdit(ctx, a, id, version, caseEdit{
		action: followup.EditReturn,
		step:   followup.StepReturn,
		intent: followup.SetState(followup.RecordingReceived),
		apply: func(ctx context.Context, tx pgx.Tx, cur Case, next *Case, rec *caseSnapshot) error {
			st, err := studySettings(ctx, tx)
			if err != nil {
				return err
			}
			loc := st.Location()
			if err := followup.CheckReturn(backOn, cur.RecorderSentAt, s.now(), loc); err != nil {
				return err
			}
			next.enter(followup.RecordingReceived, s.now())
			next.RecordingBackAt = followup.StepTime(backOn, s.now(), loc)
			return nil
		},
	})
}

// SetCaseNote changes the short working note shown on the lists.
func (s *Store) SetCaseNote(ctx context.Context, a cohort.Actor, id int64, version int, note string) (Case, error) {
	note = strings.TrimSpace(note)
	return s.oneCaseEdit(ctx, a, id, version, caseEdit{
		action: followup.EditNote,
		step:   followup.StepNote,
		intent: followup.SetNote(note),
		apply: func(ctx context.Context, tx pgx.Tx, cur Case, next *Case, rec *caseSnapshot) error {
			if err := followup.CheckNote(note); err != nil {
				return err
			}
			next.Note = note
			return nil
		},
	})
}
