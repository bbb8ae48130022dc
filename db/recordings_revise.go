package db

import (
	"context"
	"fmt"
	"strconv"
	"strings"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
	"cohortdesk/cohort/overread"

	"github.com/jackc/pgx/v5"
)

// OverReadRevision is a reading as it was before its reader amended or
// withdrew it, with what became of it.
type OverReadRevision struct {
	OverRead
	Change    overread.Change
	Reason    string // free text: stays inside the system
	ChangedBy string
	ChangedAt time.Time
}

// revisionsOf lists a recording's amended and withdrawn readings, oldest
// change first.
func revisionsOf(ctx context.Context, q querier, recordingID int64) ([]OverReadRevision, error) {
	rows, err := q.Query(ctx, `
		SELECT over_read_id, role, rhythm, confidence, coalesce(reader_id, 0), reader, read_on, comment, created_by, created_at,
		       change, reason, changed_by, changed_at
		FROM over_read_revisions WHERE recording_id = $1 ORDER BY changed_at, id`, recordingID)
	if err != nil {
		return nil, err
	}
	return pgx.CollectRows(rows, func(r pgx.CollectableRow) (OverReadRevision, error) {
		var v OverReadRevision
		var role, rhythm, conf, change string
		var on time.Time
		err := r.Scan(&v.ID, &role, &rhythm, &conf, &v.ReaderID, &v.Reader, &on, &v.Comment, &v.CreatedBy, &v.CreatedAt,
			&change, &v.Reason, &v.ChangedBy, &v.ChangedAt)
		v.Role, v.Rhythm, v.Confidence, v.On = overread.Role(role), overread.Rhythm(rhythm), overread.Confidence(conf), cohort.DateOf(on)
		v.Change = overread.Change(change)
		return v, err
	})
}

// RevisionInput is a reader's correction of their reading, as the form gives
// it.
type RevisionInput struct {
	Role       overread.Role
	Change     overread.Change
	Rhythm     overread.Rhythm     // the amended reading's
	Confidence overread.Confidence // the amended reading's
	Reason     string
}

// ReviseOverRead amends or withdraws a reading by its own reader, with the
// reason (rules in overread.Revision.Apply): the reading as it was is kept
// in over_read_revisions, the recording's current readings change, and the
// audit trail records both. The case follows what the readings now settle:
// a case in "recording received" whose recordings now have a diagnostic
// over-read moves to "over-read"; a case in "over-read" whose recordings no
// longer have one goes back to "recording received". A case that has ended
// keeps its readings as they are.
func (s *Store) ReviseOverRead(ctx context.Context, a cohort.Actor, recordingID int64, in RevisionInput) (Recording, error) {
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		var caseID int64
		if err := tx.QueryRow(ctx, `SELECT case_id FROM recordings WHERE id = $1 FOR UPDATE`, recordingID).Scan(&caseID); err != nil {
			return err
		}
		c, err := lockCase(ctx, tx, caseID)
		if err != nil {
			return err
		}
		if c.State.Terminal() {
			return &cohort.ValidationError{Fields: map[string]string{"role": "the case has ended (" + c.State.Label() + "); its readings stay as they are"}}
		}
		have, err := readingsOf(ctx, tx, []int64{recordingID})
		if err != nil {
			return err
		}
		current := make([]overread.Reading, len(have[recordingID]))
		var old OverRead
		for i, o := range have[recordingID] {
			current[i] = o.Reading
			if o.Role == in.Role {
				old = o
			}
		}
		rev := overread.Revision{Role: in.Role, Change: in.Change, Rhythm: in.Rhythm, Confidence: in.Confidence, Reason: in.Reason, By: a.UserID}
		if _, err := rev.Apply(current); err != nil {
			return err
		}
		reason := strings.TrimSpace(in.Reason)
		var revID int64
		if err := tx.QueryRow(ctx, `
			INSERT INTO over_read_revisions (over_read_id, recording_id, case_id, participant_id, role, rhythm, confidence, comment,
			    reader_id, reader, read_on, created_by, created_at, change, reason, changed_by_id, changed_by, changed_at)
			SELECT id, recording_id, case_id, participant_id, role, rhythm, confidence, comment, reader_id, reader, read_on, created_by,
			       created_at, $2, $3, $4, $5, $6
			FROM over_reads WHERE id = $1 RETURNING id`, old.ID, string(in.Change), reason, actorID(a), a.Label(), s.now()).Scan(&revID); err != nil {
			return err
		}
		before := readingAudit{ID: old.ID, CaseID: caseID, Role: string(old.Role), Rhythm: string(old.Rhythm), Confidence: string(old.Confidence),
			Comment: freeText("over_read_revisions", revID, "comment", old.Comment), ReaderID: old.ReaderID, Reader: old.Reader, ReadOn: old.On.String()}
		var after any
		if in.Change == overread.Amended {
			if _, err := tx.Exec(ctx, `UPDATE over_reads SET rhythm = $2, confidence = $3, created_by = $4, created_at = $5 WHERE id = $1`,
				old.ID, string(in.Rhythm), string(in.Confidence), a.Label(), s.now()); err != nil {
				return err
			}
			amended := before
			amended.Rhythm, amended.Confidence = string(in.Rhythm), string(in.Confidence)
			after = amended
		} else if _, err := tx.Exec(ctx, `DELETE FROM over_reads WHERE id = $1`, old.ID); err != nil {
			return err
		}
		action := "over_read.amend"
		if in.Change == overread.Withdrawn {
			action = "over_read.withdraw"
		}
		if err := audit(ctx, tx, a, action, "recording", strconv.FormatInt(recordingID, 10), before,
			map[string]any{"reading": after, "reason": freeText("over_read_revisions", revID, "reason", reason)}); err != nil {
			return err
		}
		return s.followReadings(ctx, tx, a, c, in.Change)
	})
	if err != nil {
		return Recording{}, mapCaseErr("revise over-read", err)
	}
	return s.Recording(ctx, recordingID)
}

// followReadings moves case c to the state its recordings' readings now
// settle, after a reading was corrected (see ReviseOverRead).
func (s *Store) followReadings(ctx context.Context, tx pgx.Tx, a cohort.Actor, c Case, change overread.Change) error {
	rows, err := tx.Query(ctx, `SELECT id, too_short FROM recordings WHERE case_id = $1`, c.ID)
	if err != nil {
		return err
	}
	short := map[int64]bool{}
	var ids []int64
	for rows.Next() {
		var id int64
		var tooShort bool
		if err := rows.Scan(&id, &tooShort); err != nil {
			rows.Close()
			return err
		}
		short[id] = tooShort
		ids = append(ids, id)
	}
	rows.Close()
	if err := rows.Err(); err != nil {
		return err
	}
	by, err := readingsOf(ctx, tx, ids)
	if err != nil {
		return err
	}
	diagnostic := false
	var settled cohort.Date
	for _, id := range ids {
		v, err := conclusionOf(id, by[id])
		if err != nil {
			return err
		}
		if v.Diagnostic(short[id]) {
			diagnostic = true
			if settled.IsZero() || v.SettledOn.Before(settled) {
				settled = v.SettledOn
			}
		}
	}
	st, err := studySettings(ctx, tx)
	if err != nil {
		return err
	}
	next, ok := followup.AfterReadings(c.State, diagnostic)
	switch {
	case !ok:
	case diagnostic:
		_, err = s.advanceCase(ctx, tx, a, c.ID, next, followup.StepTime(settled, s.now(), st.Location()), "")
	default:
		_, err = s.advanceCase(ctx, tx, a, c.ID, next, s.now(),
			fmt.Sprintf("a reading was %s: no recording of the case has a settled over-read", change.Label()))
	}
	return err
}
