package db

import (
	"context"
	"encoding/json"
	"errors"
	"strconv"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"

	"github.com/jackc/pgx/v5"
)

// The edit-and-audit engine of a case: every change to a case, by a person
// or by the system, goes through editCase, which locks the row, refuses a
// stale copy, applies the change, reschedules, writes and audits, all in one
// transaction.

// caseSnapshot is a case as the audit trail keeps it: every field a person can
// change, with the version it produced, so the trail can say what any version
// looked like. No identifying details of the participant are in it, and no
// staff free text: the working note, the closing reason, a move's reason and
// an attempt's note are kept by reference (textRef); the text fields are
// filled only in events written before that rule.
type caseSnapshot struct {
	ID              int64          `json:"id"`
	ParticipantID   int64          `json:"participant_id"`
	StudyID         string         `json:"study_id"`
	ProtocolID      int            `json:"protocol_id"`
	FirstWeek       int            `json:"first_week"`
	LastWeek        int            `json:"last_week"`
	State           string         `json:"state"`
	OwnerID         int64          `json:"owner_id,omitempty"`
	Owner           string         `json:"owner,omitempty"`
	NextAction      string         `json:"next_action,omitempty"`
	DueAt           *time.Time     `json:"due_at,omitempty"`
	ReachedAt       *time.Time     `json:"reached_at,omitempty"`
	RecorderSentAt  *time.Time     `json:"recorder_sent_at,omitempty"`
	TrackingNumber  string         `json:"tracking_number,omitempty"`
	RecordingBackAt *time.Time     `json:"recording_back_at,omitempty"`
	OverReadAt      *time.Time     `json:"over_read_at,omitempty"`
	ClosedAt        *time.Time     `json:"closed_at,omitempty"`
	ClosingNote     string         `json:"closing_note,omitempty"` // older events only
	ClosingNoteRef  *textRef       `json:"closing_note_ref,omitempty"`
	Note            string         `json:"note,omitempty"` // older events only
	NoteRef         *textRef       `json:"note_ref,omitempty"`
	Version         int            `json:"version"`
	Attempt         *attemptRecord `json:"attempt,omitempty"`
	WeeksAdded      []int          `json:"weeks_added,omitempty"`
	Reason          string         `json:"reason,omitempty"` // older events only
	ReasonRef       *textRef       `json:"reason_ref,omitempty"`
	Bulk            bool           `json:"bulk,omitempty"`
	// reason is the reason given for this edit, which editCase records by
	// reference; it is not itself written.
	reason string
}

type attemptRecord struct {
	ID      int64     `json:"id"`
	At      time.Time `json:"at"`
	Channel string    `json:"channel"`
	Outcome string    `json:"outcome"`
	Note    string    `json:"note,omitempty"` // older events only
	NoteRef *textRef  `json:"note_ref,omitempty"`
}

func ptrTime(t time.Time) *time.Time {
	if t.IsZero() {
		return nil
	}
	u := t.UTC()
	return &u
}

func snapshotOf(c Case) caseSnapshot {
	return caseSnapshot{ID: c.ID, ParticipantID: c.ParticipantID, StudyID: c.StudyID, ProtocolID: c.ProtocolID,
		FirstWeek: c.FirstWeek, LastWeek: c.LastWeek, State: string(c.State), OwnerID: c.OwnerID, Owner: c.Owner,
		NextAction: string(c.NextAction), DueAt: ptrTime(c.DueAt), ReachedAt: ptrTime(c.ReachedAt),
		RecorderSentAt: ptrTime(c.RecorderSentAt), TrackingNumber: c.TrackingNumber, RecordingBackAt: ptrTime(c.RecordingBackAt),
		OverReadAt: ptrTime(c.OverReadAt), ClosedAt: ptrTime(c.ClosedAt), Version: c.Version,
		ClosingNoteRef: freeText("cases", c.ID, "closing_note", c.ClosingNote), NoteRef: freeText("cases", c.ID, "note", c.Note)}
}

// earlierNote stands for a working note the audit trail refers to but that
// is no longer the case's: the trail keeps no copy of it to show.
const earlierNote = "(an earlier note)"

// fields are the snapshot's editable fields as the person who saw it saw
// them; cur is the case as stored now. A note kept by reference is the
// current note when the digests agree, else earlierNote, which differs from
// any note a person can type and so counts as a change.
func (cs caseSnapshot) fields(cur Case) followup.CaseFields {
	note := cs.Note
	if cs.NoteRef != nil {
		note = earlierNote
		if sameText("", cs.NoteRef, cur.Note) {
			note = cur.Note
		}
	}
	return followup.CaseFields{State: followup.State(cs.State), Owner: cs.Owner, Note: note}
}

// anyVersion lets the system edit a case whatever version it is at (closing
// cases after a withdrawal); people always name the version they saw.
const anyVersion = -1

// caseEdit is one kind of change to a case.
type caseEdit struct {
	action followup.Edit // recorded as the audit action
	// step is the step of the case's step table a person takes (empty for
	// the system's own edits); a case whose state does not offer it refuses
	// the edit before anything else (followup.CheckStep).
	step followup.Step
	// intent is what the person meant to set, applied to the fields they saw;
	// it words the conflict message when their copy was stale.
	intent followup.Intent
	// apply validates the change and makes it on next (a copy of the locked
	// row); it may write rows of its own (an attempt) and add to the audit
	// record.
	apply func(ctx context.Context, tx pgx.Tx, cur Case, next *Case, rec *caseSnapshot) error
}

// editCase applies one change inside tx: lock, version check, change,
// reschedule, write, audit. It returns the case as stored.
func (s *Store) editCase(ctx context.Context, tx pgx.Tx, a cohort.Actor, id int64, version int, e caseEdit) (Case, error) {
	cur, err := lockCase(ctx, tx, id)
	if err != nil {
		return Case{}, err
	}
	if version != anyVersion && cur.Version != version {
		return Case{}, staleCase(ctx, tx, cur, version, e.intent)
	}
	if e.step != "" {
		if err := followup.CheckStep(cur.State, e.step); err != nil {
			return Case{}, err
		}
	}
	next := cur
	var rec caseSnapshot
	if err := e.apply(ctx, tx, cur, &next, &rec); err != nil {
		return Case{}, err
	}
	now := s.now()
	switch {
	case next.State.Terminal() && next.ClosedAt.IsZero():
		next.ClosedAt = now
	case !next.State.Terminal():
		next.ClosedAt = time.Time{}
	}
	st, err := studySettings(ctx, tx)
	if err != nil {
		return Case{}, err
	}
	attempts, err := caseAttempts(ctx, tx, id)
	if err != nil {
		return Case{}, err
	}
	schedule(&next, attempts, st)
	var owner any
	if next.OwnerID != 0 {
		owner = next.OwnerID
	}
	err = tx.QueryRow(ctx, `
		UPDATE cases SET state = $2, owner_id = $3, next_action = $4, due_at = $5, reached_at = $6, recorder_sent_at = $7,
		  tracking_number = $8, recording_back_at = $9, over_read_at = $10, closed_at = $11, closing_note = $12, note = $13,
		  version = version + 1, updated_at = now()
		WHERE id = $1 RETURNING version`,
		id, string(next.State), owner, string(next.NextAction), timeArg(next.DueAt), timeArg(next.ReachedAt), timeArg(next.RecorderSentAt),
		next.TrackingNumber, timeArg(next.RecordingBackAt), timeArg(next.OverReadAt), timeArg(next.ClosedAt), next.ClosingNote, next.Note).
		Scan(&next.Version)
	if err != nil {
		return Case{}, err
	}
	nw := snapshotOf(next)
	nw.Attempt, nw.WeeksAdded, nw.Bulk = rec.Attempt, rec.WeeksAdded, rec.Bulk
	if nw.ReasonRef, err = reasonRef(ctx, tx, next, rec.reason); err != nil {
		return Case{}, err
	}
	if err := audit(ctx, tx, a, string(e.action), "case", strconv.FormatInt(id, 10), snapshotOf(cur), nw); err != nil {
		return Case{}, err
	}
	return next, nil
}

// reasonRef keeps the reason given for an edit out of the audit event: a
// final move's reason is the case's closing note; any other is kept in
// audit_texts, where it can be removed, and referred to.
func reasonRef(ctx context.Context, tx pgx.Tx, next Case, reason string) (*textRef, error) {
	if reason == "" {
		return nil, nil
	}
	if next.State.Terminal() && reason == next.ClosingNote {
		return freeText("cases", next.ID, "closing_note", reason), nil
	}
	var id int64
	if err := tx.QueryRow(ctx, `INSERT INTO audit_texts (object_type, object_id, body) VALUES ('case', $1, $2) RETURNING id`,
		strconv.FormatInt(next.ID, 10), reason).Scan(&id); err != nil {
		return nil, err
	}
	return freeText("audit_texts", id, "body", reason), nil
}

// oneCaseEdit runs one edit in its own transaction.
func (s *Store) oneCaseEdit(ctx context.Context, a cohort.Actor, id int64, version int, e caseEdit) (Case, error) {
	var out Case
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		var err error
		out, err = s.editCase(ctx, tx, a, id, version, e)
		return err
	})
	if err != nil {
		return Case{}, mapCaseErr(string(e.action), err)
	}
	return out, nil
}

// mapCaseErr keeps the domain's own errors as they are (their messages are
// meant for people) and maps driver errors.
func mapCaseErr(op string, err error) error {
	var ve *cohort.ValidationError
	var ce *cohort.ConflictError
	if errors.As(err, &ve) || errors.As(err, &ce) {
		return err
	}
	return mapErr(op, err)
}

// staleCase builds the refusal of an edit based on an old version: what the
// person saw is read back from the audit trail (every version's fields are
// there), with the edits made since; followup.StaleCopy compares them with
// what is stored now and with what the person meant to do, and words it.
func staleCase(ctx context.Context, tx pgx.Tx, cur Case, version int, intent followup.Intent) error {
	stale := followup.StaleCopy{SeenVersion: version, Now: cur.Fields(), NowVersion: cur.Version}
	rows, err := tx.Query(ctx, `
		SELECT actor, action FROM audit_events
		WHERE object_type = 'case' AND object_id = $1 AND (new_value->>'version')::int > $2
		ORDER BY id`, strconv.FormatInt(cur.ID, 10), version)
	if err != nil {
		return err
	}
	stale.Since, err = pgx.CollectRows(rows, func(r pgx.CollectableRow) (followup.Edited, error) {
		var e followup.Edited
		var action string
		err := r.Scan(&e.By, &action)
		e.Edit = followup.Edit(action)
		return e, err
	})
	if err != nil {
		return err
	}
	var raw []byte
	err = tx.QueryRow(ctx, `
		SELECT new_value FROM audit_events
		WHERE object_type = 'case' AND object_id = $1 AND (new_value->>'version')::int = $2
		ORDER BY id LIMIT 1`, strconv.FormatInt(cur.ID, 10), version).Scan(&raw)
	switch {
	case err == nil:
		var base caseSnapshot
		if json.Unmarshal(raw, &base) == nil {
			seen := base.fields(cur)
			stale.Seen = &seen
		}
	case !errors.Is(err, pgx.ErrNoRows):
		return err
	}
	return stale.Refusal(intent)
}
