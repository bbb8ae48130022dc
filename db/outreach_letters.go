package db

import (
	"context"
	"errors"
	"fmt"
	"strconv"
	"strings"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
	"cohortdesk/cohort/outreach"

	"github.com/jackc/pgx/v5"
)

// Letters are printed in batches: the letters of the selected cases are made
// out once and kept (PrintLetters), so the PDF can be printed again
// identically, and recorded as posted once (PostLetters), which writes a
// message and a contact attempt for exactly the letters printed.

// LetterBatch is a batch without the letters' contents.
type LetterBatch struct {
	ID        int64
	Template  MessageTemplate
	Paper     string
	CreatedAt time.Time
	CreatedBy string
	PostedAt  time.Time // zero until recorded as posted
	PostedBy  string
	Cases     []LetterCase
	Skipped   []string // "study ID: reason" of the selected cases that got no letter
}

// LetterCase is one letter of a batch, named by its case.
type LetterCase struct {
	CaseID  int64
	StudyID string
}

// Letter is one letter as printed: PHI.
type Letter struct {
	LetterCase
	Address []string
	Subject string
	Body    string
}

// PrintLetters makes out the letter for purpose p for each selected case and
// keeps them as a batch to print on paper. A case whose participant cannot
// get a letter (preferences, no address, a missing value, a closed case) is
// skipped with the reason; when none can, nothing is kept. The participants'
// details are read with the actor's rights, each view audited.
func (s *Store) PrintLetters(ctx context.Context, a cohort.Actor, refs []CaseRef, p outreach.Purpose, paper outreach.Paper) (int64, []SkippedCase, error) {
	var id int64
	var skipped []SkippedCase
	refs, err := bulkRefs(refs)
	if err != nil {
		return 0, nil, err
	}
	ids := make([]int64, len(refs))
	for i, r := range refs {
		ids[i] = r.ID
	}
	err = s.inTx(ctx, func(tx pgx.Tx) error {
		rows, err := tx.Query(ctx, `SELECT `+caseCols+` FROM `+caseFrom+` WHERE c.id = ANY($1) ORDER BY p.study_id, c.id`, ids)
		if err != nil {
			return err
		}
		cases, err := pgx.CollectRows(rows, func(r pgx.CollectableRow) (Case, error) { return scanCase(r) })
		if err != nil {
			return err
		}
		if len(cases) != len(ids) {
			return &cohort.ValidationError{Fields: map[string]string{"cases": "a selected case no longer exists; reload the list"}}
		}
		var letters []Letter
		var tpl MessageTemplate
		for _, c := range cases {
			sp, err := tx.Begin(ctx)
			if err != nil {
				return err
			}
			d, err := func() (draft, error) {
				if err := followup.CheckStep(c.State, followup.StepMessage); err != nil {
					return draft{}, err
				}
				return makeDraft(ctx, sp, a, c, p, followup.ChannelLetter, s.now())
			}()
			var ve *cohort.ValidationError
			if errors.As(err, &ve) {
				if err := sp.Rollback(ctx); err != nil {
					return err
				}
				skipped = append(skipped, SkippedCase{CaseID: c.ID, StudyID: c.StudyID, Reason: firstField(ve)})
				continue
			}
			if err != nil {
				return err
			}
			if err := sp.Commit(ctx); err != nil {
				return err
			}
			tpl = d.tpl
			letters = append(letters, Letter{LetterCase: LetterCase{c.ID, c.StudyID}, Address: d.address, Subject: d.msg.Subject, Body: d.msg.Body})
		}
		if len(letters) == 0 {
			reasons := make([]string, len(skipped))
			for i, sk := range skipped {
				reasons[i] = sk.StudyID + ": " + sk.Reason
			}
			return &cohort.ValidationError{Fields: map[string]string{"cases": "no letter could be made: " + strings.Join(reasons, "; ")}}
		}
		var actorID any
		if a.UserID != 0 {
			actorID = a.UserID
		}
		notes := []string{}
		for _, sk := range skipped {
			notes = append(notes, sk.StudyID+": "+sk.Reason)
		}
		if err := tx.QueryRow(ctx, `INSERT INTO letter_batches (template_id, paper, created_by, actor_id, skipped) VALUES ($1, $2, $3, $4, $5) RETURNING id`,
			tpl.ID, paper.Name, a.Label(), actorID, notes).Scan(&id); err != nil {
			return err
		}
		var printed []int64
		for i, l := range letters {
			if _, err := tx.Exec(ctx, `INSERT INTO letter_batch_items (batch_id, position, case_id, participant_id, address, subject, body)
				SELECT $1, $2, c.id, c.participant_id, $4, $5, $6 FROM cases c WHERE c.id = $3`,
				id, i+1, l.CaseID, l.Address, l.Subject, l.Body); err != nil {
				return err
			}
			printed = append(printed, l.CaseID)
		}
		return audit(ctx, tx, a, "letters.print", "letter_batch", strconv.FormatInt(id, 10), nil,
			map[string]any{"template_id": tpl.ID, "template_version": tpl.Version, "paper": paper.Name, "cases": printed, "skipped": len(skipped)})
	})
	if err != nil {
		return 0, nil, mapCaseErr("print letters", err)
	}
	return id, skipped, nil
}

// firstField is the message of a refusal's most telling field.
func firstField(ve *cohort.ValidationError) string {
	for _, f := range []string{"channel", "message", "purpose", "state", "cases"} {
		if m, ok := ve.Fields[f]; ok {
			return m
		}
	}
	return ve.Error()
}

// LetterBatch returns a batch and the cases it holds, without PHI.
func (s *Store) LetterBatch(ctx context.Context, id int64) (LetterBatch, error) {
	var b LetterBatch
	var tplID int
	var posted *time.Time
	err := s.pool.QueryRow(ctx, `SELECT id, template_id, paper, created_at, created_by, posted_at, posted_by, skipped FROM letter_batches WHERE id = $1`, id).
		Scan(&b.ID, &tplID, &b.Paper, &b.CreatedAt, &b.CreatedBy, &posted, &b.PostedBy, &b.Skipped)
	if err != nil {
		return b, mapErr("letter batch", err)
	}
	b.PostedAt = timeOf(posted)
	if b.Template, err = s.MessageTemplate(ctx, tplID); err != nil {
		return b, err
	}
	rows, err := s.pool.Query(ctx, `SELECT i.case_id, p.study_id FROM letter_batch_items i JOIN participants p ON p.id = i.participant_id
		WHERE i.batch_id = $1 ORDER BY i.position`, id)
	if err != nil {
		return b, mapErr("letter batch", err)
	}
	b.Cases, err = pgx.CollectRows(rows, func(r pgx.CollectableRow) (LetterCase, error) {
		var c LetterCase
		err := r.Scan(&c.CaseID, &c.StudyID)
		return c, err
	})
	return b, mapErr("letter batch", err)
}

// LetterBatchLetters returns the letters of a batch as printed, to a role
// that sees PHI; each participant's view is audited.
func (s *Store) LetterBatchLetters(ctx context.Context, a cohort.Actor, id int64) ([]Letter, error) {
	if !a.Role.SeesPHI() {
		return nil, fmt.Errorf("db: letters: role %s: %w", a.Role, cohort.ErrForbidden)
	}
	var out []Letter
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		rows, err := tx.Query(ctx, `SELECT i.case_id, p.study_id, i.participant_id, i.address, i.subject, i.body
			FROM letter_batch_items i JOIN participants p ON p.id = i.participant_id WHERE i.batch_id = $1 ORDER BY i.position`, id)
		if err != nil {
			return err
		}
		var pids []int64
		out, err = pgx.CollectRows(rows, func(r pgx.CollectableRow) (Letter, error) {
			var l Letter
			var pid int64
			err := r.Scan(&l.CaseID, &l.StudyID, &pid, &l.Address, &l.Subject, &l.Body)
			pids = append(pids, pid)
			return l, err
		})
		if err != nil {
			return err
		}
		if len(out) == 0 {
			return pgx.ErrNoRows
		}
		for _, pid := range pids {
			if err := audit(ctx, tx, a, "participant.view_phi", "participant", strconv.FormatInt(pid, 10), nil,
				map[string]any{"purpose": "letter batch " + strconv.FormatInt(id, 10)}); err != nil {
				return err
			}
		}
		return nil
	})
	return out, mapErr("letters", err)
}

// PostLetters records the letters of a batch as posted, once: for each
// letter printed, a contact attempt (a letter, a message left, through the
// same edit as one logged by hand) and a message with status sent. The
// letters are on paper already, so a case changed since printing does not
// stop them being recorded. A batch recorded before is refused, naming who
// recorded it and when.
func (s *Store) PostLetters(ctx context.Context, a cohort.Actor, id int64) (int, error) {
	n := 0
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		var tplID int
		var posted *time.Time
		var postedBy string
		if err := tx.QueryRow(ctx, `SELECT template_id, posted_at, posted_by FROM letter_batches WHERE id = $1 FOR UPDATE`, id).
			Scan(&tplID, &posted, &postedBy); err != nil {
			return err
		}
		if posted != nil {
			return &cohort.ConflictError{Message: fmt.Sprintf("these letters were recorded as posted by %s on %s; nothing was recorded again",
				postedBy, posted.UTC().Format("2006-01-02 15:04 UTC"))}
		}
		tpl, err := scanTemplate(tx.QueryRow(ctx, `SELECT `+templateCols+` FROM message_templates WHERE id = $1`, tplID))
		if err != nil {
			return err
		}
		rows, err := tx.Query(ctx, `SELECT case_id, address, subject, body FROM letter_batch_items WHERE batch_id = $1 ORDER BY case_id`, id)
		if err != nil {
			return err
		}
		type item struct {
			caseID  int64
			address []string
			subject string
			body    string
		}
		items, err := pgx.CollectRows(rows, func(r pgx.CollectableRow) (item, error) {
			var it item
			err := r.Scan(&it.caseID, &it.address, &it.subject, &it.body)
			return it, err
		})
		if err != nil {
			return err
		}
		note := "letter: " + tpl.Purpose.Label() + " (template v" + strconv.Itoa(tpl.Version) + "), batch " + strconv.FormatInt(id, 10)
		for _, it := range items {
			d := draft{tpl: tpl, msg: outreach.Message{Subject: it.subject, Body: it.body}, recipient: strings.Join(it.address, "\n"), sendAt: s.now()}
			_, err := s.editCase(ctx, tx, a, it.caseID, anyVersion, caseEdit{
				action: followup.EditAttempt,
				intent: followup.LogAttempt(followup.OutcomeMessageLeft),
				apply: func(ctx context.Context, tx pgx.Tx, cur Case, next *Case, rec *caseSnapshot) error {
					if err := s.attemptEdit(a, followup.Letter(note), true).apply(ctx, tx, cur, next, rec); err != nil {
						return err
					}
					_, err := insertMessage(ctx, tx, a, cur, rec.Attempt.ID, d, followup.ChannelLetter, id, outreach.Sent)
					return err
				},
			})
			if err != nil {
				return bulkErr(it.caseID, err)
			}
			n++
		}
		if _, err := tx.Exec(ctx, `UPDATE letter_batches SET posted_at = clock_timestamp(), posted_by = $2 WHERE id = $1`, id, a.Label()); err != nil {
			return err
		}
		return audit(ctx, tx, a, "letters.posted", "letter_batch", strconv.FormatInt(id, 10), nil, map[string]any{"letters": n})
	})
	if err != nil {
		return 0, mapCaseErr("post letters", err)
	}
	return n, nil
}
