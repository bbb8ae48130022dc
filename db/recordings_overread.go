package db

import (
	"context"
	"errors"
	"strconv"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
	"cohortdesk/cohort/overread"

	"github.com/jackc/pgx/v5"
)

// OverReadInput is a reading as the form, or a loader, gives it.
type OverReadInput struct {
	// Role is the reading's place: "first", "second" or "adjudication". The
	// form names the one it offered, so two people entering at once cannot
	// both be first; "" takes whichever is due (for loaders).
	Role       overread.Role
	Rhythm     overread.Rhythm
	Confidence overread.Confidence
	Comment    string // free text, at most overread.MaxCommentChars; stays inside the system
	// ReaderID is the reading investigator's account: the signed-in
	// investigator on the form, any active investigator for a loader.
	ReaderID int64
	// ReadOn is the day of the reading; zero is today in the study's zone.
	ReadOn cohort.Date
}

// readingAudit is a reading as the audit trail keeps it.
type readingAudit struct {
	ID         int64    `json:"id"`
	CaseID     int64    `json:"case_id"`
	Role       string   `json:"role"`
	Rhythm     string   `json:"rhythm"`
	Confidence string   `json:"confidence"`
	Comment    *textRef `json:"comment,omitempty"` // free text, by reference
	ReaderID   int64    `json:"reader_id"`
	Reader     string   `json:"reader"`
	ReadOn     string   `json:"read_on"`
	Verdict    string   `json:"verdict"`
}

// AddOverRead enters a reading of a recording: the first, an optional second
// by another investigator, or the adjudication when the two disagree (rules in
// overread.Entry.Settle). The reader must be an active investigator. The reading, its
// audit event and, when the readings now settle an interpretable rhythm on a
// recording of diagnostic length, the case's move from "recording received" to
// "over-read" are written in one transaction. An uninterpretable verdict, a
// disagreement, or a recording under 30 s leave the case where it is.
func (s *Store) AddOverRead(ctx context.Context, a cohort.Actor, recordingID int64, in OverReadInput) (Recording, error) {
	st, err := s.StudySettings(ctx)
	if err != nil {
		return Recording{}, err
	}
	loc := st.Location()
	now := s.now()
	err = s.inTx(ctx, func(tx pgx.Tx) error {
		var caseID, pid int64
		var taken time.Time
		var tooShort bool
		err := tx.QueryRow(ctx, `SELECT case_id, participant_id, taken_at, too_short FROM recordings WHERE id = $1 FOR UPDATE`, recordingID).
			Scan(&caseID, &pid, &taken, &tooShort)
		if err != nil {
			return err
		}
		have, err := readingsOf(ctx, tx, []int64{recordingID})
		if err != nil {
			return err
		}
		existing := make([]overread.Reading, len(have[recordingID]))
		for i, o := range have[recordingID] {
			existing[i] = o.Reading
		}
		reader, err := s.investigator(ctx, tx, in.ReaderID)
		if err != nil {
			return err
		}
		e, err := overread.Entry{Reading: overread.Reading{Role: in.Role, Rhythm: in.Rhythm, Confidence: in.Confidence,
			ReaderID: reader.ID, Reader: reader.Name, On: in.ReadOn}, Comment: in.Comment}.
			Settle(existing, cohort.DateOf(now.In(loc)), cohort.DateOf(taken.In(loc)))
		if err != nil {
			return err
		}
		next := e.Reading
		var id int64
		err = tx.QueryRow(ctx, `
			INSERT INTO over_reads (recording_id, case_id, participant_id, role, rhythm, confidence, comment, reader_id, reader, read_on, created_by)
			VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11) RETURNING id`,
			recordingID, caseID, pid, string(next.Role), string(next.Rhythm), string(next.Confidence), e.Comment, next.ReaderID, next.Reader,
			next.On.String(), a.Label()).Scan(&id)
		if err != nil {
			return err
		}
		v, err := overread.Resolve(append(existing, next))
		if err != nil {
			return err
		}
		rec := readingAudit{ID: id, CaseID: caseID, Role: string(next.Role), Rhythm: string(next.Rhythm), Confidence: string(next.Confidence),
			Comment: freeText("over_reads", id, "comment", e.Comment), ReaderID: next.ReaderID, Reader: next.Reader, ReadOn: next.On.String(), Verdict: string(v.Status)}
		if err := audit(ctx, tx, a, "over_read.add", "recording", strconv.FormatInt(recordingID, 10), nil, rec); err != nil {
			return err
		}
		if !v.Diagnostic(tooShort) {
			return nil
		}
		c, err := lockCase(ctx, tx, caseID)
		if err != nil {
			return err
		}
		if next, ok := followup.AfterReadings(c.State, true); ok {
			_, err = s.advanceCase(ctx, tx, a, caseID, next, followup.StepTime(v.SettledOn, now, loc), "")
		}
		return err
	})
	if err != nil {
		return Recording{}, mapCaseErr("add over-read", err)
	}
	return s.Recording(ctx, recordingID)
}

// investigator reads an active investigator's account; a zero User when the
// id names nobody of that kind.
func (s *Store) investigator(ctx context.Context, tx pgx.Tx, id int64) (User, error) {
	if id <= 0 {
		return User{}, nil
	}
	rows, err := tx.Query(ctx, `SELECT `+userCols+` FROM users WHERE id = $1`, id)
	if err != nil {
		return User{}, err
	}
	u, err := pgx.CollectExactlyOneRow(rows, scanUser)
	if errors.Is(err, pgx.ErrNoRows) || (err == nil && (!u.Active || u.Role != cohort.Investigator)) {
		return User{}, nil
	}
	return u, err
}

// Investigators lists the active investigators by name, for loaders that
// pick a reader and for the recording page.
func (s *Store) Investigators(ctx context.Context) ([]User, error) {
	rows, err := s.reader(ctx).Query(ctx, `SELECT `+userCols+` FROM users WHERE active AND role = $1 ORDER BY display_name, id`, string(cohort.Investigator))
	if err != nil {
		return nil, mapErr("investigators", err)
	}
	out, err := pgx.CollectRows(rows, scanUser)
	return out, mapErr("investigators", err)
}
