package db

import (
	"context"
	"errors"
	"strconv"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
	"cohortdesk/cohort/outreach"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgtype"
)

// The morning summary: people who ask for it get an e-mail on working-day
// mornings with the counts of their follow-up work, as triage counts it.

// JobMorningSummary is the job kind that sends the morning summaries; it
// queues its own next run.
const JobMorningSummary = "summary.morning"

// MorningSummaryWanted reports whether the account asked for the summary.
func (s *Store) MorningSummaryWanted(ctx context.Context, userID int64) (bool, error) {
	var on bool
	err := s.pool.QueryRow(ctx, `SELECT morning_summary FROM users WHERE id = $1`, userID).Scan(&on)
	return on, mapErr("morning summary", err)
}

// SetMorningSummary turns the account's morning summary on or off, audited.
func (s *Store) SetMorningSummary(ctx context.Context, a cohort.Actor, userID int64, on bool) error {
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		var old bool
		if err := tx.QueryRow(ctx, `SELECT morning_summary FROM users WHERE id = $1 FOR UPDATE`, userID).Scan(&old); err != nil {
			return err
		}
		if _, err := tx.Exec(ctx, `UPDATE users SET morning_summary = $2 WHERE id = $1`, userID, on); err != nil {
			return err
		}
		return audit(ctx, tx, a, "user.morning_summary", "user", strconv.FormatInt(userID, 10),
			map[string]bool{"morning_summary": old}, map[string]bool{"morning_summary": on})
	})
	return mapErr("set morning summary", err)
}

// MorningRecipient is an account that gets the summary.
type MorningRecipient struct {
	UserID int64
	Name   string
	Email  string
}

// Morning is what the morning summaries need: who gets one, the counts of
// each (by account id), the study's name and clock.
type Morning struct {
	Recipients []MorningRecipient
	Counts     map[int64]outreach.Counts
	Settings   StudySettings
	Now        time.Time // in the study's zone
}

// MorningWork reads the recipients and counts each one's overdue and
// due-today cases and the study's new unowned flags with followup.Urgency,
// the rule triage groups by.
func (s *Store) MorningWork(ctx context.Context) (Morning, error) {
	m := Morning{Counts: map[int64]outreach.Counts{}}
	err := pgx.BeginTxFunc(ctx, s.pool, pgx.TxOptions{AccessMode: pgx.ReadOnly}, func(tx pgx.Tx) error {
		var err error
		if m.Settings, err = studySettings(ctx, tx); err != nil {
			return err
		}
		m.Now = s.now().In(m.Settings.Location())
		rows, err := tx.Query(ctx, `SELECT id, display_name, email FROM users WHERE active AND morning_summary ORDER BY id`)
		if err != nil {
			return err
		}
		if m.Recipients, err = pgx.CollectRows(rows, func(r pgx.CollectableRow) (MorningRecipient, error) {
			var x MorningRecipient
			err := r.Scan(&x.UserID, &x.Name, &x.Email)
			return x, err
		}); err != nil {
			return err
		}
		rows, err = tx.Query(ctx, `SELECT c.id, p.study_id, c.state, coalesce(c.owner_id, 0), coalesce(u.display_name, ''), c.flagged_at, c.due_at,
			       coalesce(c.recording_back_at, rec.oldest)
			FROM `+caseFrom+` WHERE c.closed_at IS NULL`)
		if err != nil {
			return err
		}
		defer rows.Close()
		var unowned int
		for rows.Next() {
			var id, owner int64
			var it followup.TriageItem
			var state string
			var due, received pgtype.Timestamptz
			if err := rows.Scan(&id, &it.StudyID, &state, &owner, &it.Owner, &it.FlaggedAt, &due, &received); err != nil {
				return err
			}
			it.CaseID, it.State, it.Due, it.RecordingReceivedAt = strconv.FormatInt(id, 10), followup.State(state), due.Time, received.Time
			c := m.Counts[owner]
			switch followup.Urgency(it, m.Now).Bucket {
			case followup.BucketOverdue:
				c.Overdue++
			case followup.BucketDueToday:
				c.DueToday++
			case followup.BucketNewUnowned:
				unowned++
			}
			m.Counts[owner] = c
		}
		if err := rows.Err(); err != nil {
			return err
		}
		for _, r := range m.Recipients {
			c := m.Counts[r.UserID]
			c.NewUnowned = unowned
			m.Counts[r.UserID] = c
		}
		return nil
	})
	return m, mapErr("morning work", err)
}

// MorningSummarySent reports whether the account's summary for day went.
func (s *Store) MorningSummarySent(ctx context.Context, userID int64, day cohort.Date) (bool, error) {
	var sent bool
	err := s.pool.QueryRow(ctx, `SELECT EXISTS (SELECT 1 FROM morning_summaries WHERE user_id = $1 AND day = $2)`, userID, day.String()).Scan(&sent)
	return sent, mapErr("morning summary sent", err)
}

// RecordMorningSummary records that the account's summary for day went.
func (s *Store) RecordMorningSummary(ctx context.Context, userID int64, day cohort.Date) error {
	_, err := s.pool.Exec(ctx, `INSERT INTO morning_summaries (user_id, day) VALUES ($1, $2) ON CONFLICT DO NOTHING`, userID, day.String())
	return mapErr("record morning summary", err)
}

// EnsureMorningJob queues the morning-summary job for at unless one is
// already waiting (a unique index keeps at most one queued), so every
// instance may call it at start-up and the job itself queues its next run.
func (s *Store) EnsureMorningJob(ctx context.Context, at time.Time) error {
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		_, err := enqueue(ctx, tx, NewJob{Kind: JobMorningSummary, Label: "morning summaries", Payload: map[string]any{}, CreatedBy: "system", RunAfter: at})
		return err
	})
	if err = mapErr("ensure morning job", err); errors.Is(err, cohort.ErrConflict) {
		return nil // one is waiting already
	}
	return err
}
