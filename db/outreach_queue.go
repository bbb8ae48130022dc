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

// The outbox: a message to a participant is made out and written in the same
// transaction as the case's contact attempt (the attempt goes through the
// same edit as one logged by hand) and the job that sends it. Either all
// three are stored or none, so a crash can neither lose a message the case
// records nor send one it does not.

// JobSendMessage is the job kind that sends one queued message.
const JobSendMessage = "message.send"

// MessageJob is the payload of a JobSendMessage job.
type MessageJob struct {
	MessageID int64 `json:"message_id"`
}

// MessageInput is a message a person asks the desk to send on a case.
type MessageInput struct {
	Version int // the case version the person saw
	Purpose outreach.Purpose
	Channel followup.Channel
}

// QueuedMessage is a message written to the outbox.
type QueuedMessage struct {
	ID        int64
	CaseID    int64
	StudyID   string
	Channel   followup.Channel
	Template  string    // the template version's label
	SendAfter time.Time // now, or the end of the participant's quiet hours
	Held      bool
}

// draft is a message made out for one participant, not yet stored.
type draft struct {
	tpl       MessageTemplate
	msg       outreach.Message
	recipient string
	address   []string // the postal address block (letters)
	sendAt    time.Time
	held      bool
}

// recipientOf reads which contact details are on file, without reading them
// out (no PHI leaves the database, so nothing to audit), the participant's
// zone and whether they withdrew.
func recipientOf(ctx context.Context, q rowQuerier, participantID int64) (outreach.Contact, *time.Location, *time.Time, error) {
	var c outreach.Contact
	var tz string
	var withdrawn *time.Time
	err := q.QueryRow(ctx, `SELECT coalesce(i.email <> '', false), coalesce(i.phone <> '', false),
		coalesce(i.street <> '' AND i.city <> '', false), p.time_zone, p.withdrawn_on
		FROM participants p LEFT JOIN participant_identity i ON i.participant_id = p.id WHERE p.id = $1`, participantID).
		Scan(&c.Email, &c.Phone, &c.Address, &tz, &withdrawn)
	if err != nil {
		return c, nil, nil, err
	}
	loc, lerr := time.LoadLocation(tz)
	if lerr != nil {
		loc = time.UTC
	}
	return c, loc, withdrawn, nil
}

// makeDraft makes out the template in use for purpose p on channel ch for the
// participant of case cur at now: the participant must not have withdrawn,
// the preferences must allow the channel (outreach.Decide, which also holds
// e-mail and texts in quiet hours), and every value the template uses must be
// known (outreach.Template.Render). Refusals are *cohort.ValidationError in
// words fit for the person sending. The participant's details are read with
// the actor's rights and the view is audited.
func makeDraft(ctx context.Context, tx pgx.Tx, a cohort.Actor, cur Case, p outreach.Purpose, ch followup.Channel, now time.Time) (draft, error) {
	var d draft
	if !p.Valid() {
		return d, &cohort.ValidationError{Fields: map[string]string{"purpose": "choose what the message is for"}}
	}
	contact, loc, withdrawn, err := recipientOf(ctx, tx, cur.ParticipantID)
	if err != nil {
		return d, err
	}
	if withdrawn != nil {
		return d, &cohort.ValidationError{Fields: map[string]string{"channel": "the participant withdrew from the study on " + withdrawn.Format("2006-01-02") + "; nothing is sent to them"}}
	}
	prefs, err := contactPreferences(ctx, tx, cur.ParticipantID)
	if err != nil {
		return d, err
	}
	if d.sendAt, d.held, err = outreach.Decide(prefs.Preferences, contact, ch, now, loc); err != nil {
		return d, err
	}
	if d.tpl, err = currentTemplate(ctx, tx, p, ch); err != nil {
		return d, err
	}
	st, err := studySettings(ctx, tx)
	if err != nil {
		return d, err
	}
	ident, err := identityIn(ctx, tx, a, cur.ParticipantID, "message "+p.Label()+" by "+ch.Label())
	if err != nil {
		return d, err
	}
	vals := outreach.Values{
		outreach.FirstName: ident.GivenName, outreach.FamilyName: ident.FamilyName, outreach.StudyName: st.Name,
		outreach.ContactLine: outreach.ContactLineOf(st.ContactRoute), outreach.StudyNumber: cur.StudyID, outreach.TrackingNumber: cur.TrackingNumber,
		outreach.ReplyBy: outreach.WrittenDay(outreach.ReplyDay(st.Calendar(), d.sendAt, d.tpl.ReplyDays)),
	}
	if d.msg, err = d.tpl.Render(vals); err != nil {
		return d, err
	}
	d.address = outreach.AddressLines(ident.FullName(), ident.Street, ident.City, ident.ZIP)
	switch ch {
	case followup.ChannelEmail:
		d.recipient = ident.Email
	case followup.ChannelText:
		d.recipient = ident.Phone
	case followup.ChannelLetter:
		d.recipient = strings.Join(d.address, "\n")
	}
	return d, nil
}

// messageEdit is the case edit of a message: the step must be offered, the
// message made out (makeDraft), then the contact attempt logged through the
// same edit as an attempt entered by hand (a message left, by the message's
// channel), and the message and its sending job written beside it.
func (s *Store) messageEdit(a cohort.Actor, in MessageInput, bulk bool, out *QueuedMessage) caseEdit {
	return caseEdit{
		action: followup.EditAttempt,
		intent: followup.LogAttempt(followup.OutcomeMessageLeft),
		apply: func(ctx context.Context, tx pgx.Tx, cur Case, next *Case, rec *caseSnapshot) error {
			if err := followup.CheckStep(cur.State, followup.StepMessage); err != nil {
				return err
			}
			if in.Channel == followup.ChannelLetter {
				return &cohort.ValidationError{Fields: map[string]string{"channel": "letters are printed: select the cases on the case list and print their letters"}}
			}
			d, err := makeDraft(ctx, tx, a, cur, in.Purpose, in.Channel, s.now())
			if err != nil {
				return err
			}
			note := in.Channel.Label() + ": " + in.Purpose.Label() + " (template v" + strconv.Itoa(d.tpl.Version) + ")"
			if d.held {
				note += ", held until the participant's quiet hours end"
			}
			entry := followup.AttemptEntry{Channel: in.Channel, Outcome: followup.OutcomeMessageLeft, Note: note}
			if err := s.attemptEdit(a, entry, bulk).apply(ctx, tx, cur, next, rec); err != nil {
				return err
			}
			m, err := insertMessage(ctx, tx, a, cur, rec.Attempt.ID, d, in.Channel, 0, outreach.Queued)
			if err != nil {
				return err
			}
			jobID, err := enqueue(ctx, tx, NewJob{Kind: JobSendMessage, Label: fmt.Sprintf("send %s %d (case %d)", in.Channel.Label(), m, cur.ID),
				Payload: MessageJob{MessageID: m}, CreatedBy: a.Label(), RunAfter: d.sendAt})
			if err != nil {
				return err
			}
			if _, err := tx.Exec(ctx, `UPDATE messages SET job_id = $2 WHERE id = $1`, m, jobID); err != nil {
				return err
			}
			*out = QueuedMessage{ID: m, CaseID: cur.ID, StudyID: cur.StudyID, Channel: in.Channel, Template: d.tpl.Label(), SendAfter: d.sendAt, Held: d.held}
			return nil
		},
	}
}

// insertMessage writes a message row for attempt and audits it (without its
// body or recipient, which are PHI and stay in the message row).
func insertMessage(ctx context.Context, tx pgx.Tx, a cohort.Actor, cur Case, attemptID int64, d draft, ch followup.Channel, batch int64, status outreach.Status) (int64, error) {
	var actorID, batchID any
	if a.UserID != 0 {
		actorID = a.UserID
	}
	if batch != 0 {
		batchID = batch
	}
	var id int64
	err := tx.QueryRow(ctx, `
		INSERT INTO messages (participant_id, case_id, attempt_id, template_id, purpose, channel, recipient, subject, body, status,
		  send_after, held, sent_at, letter_batch_id, actor_id, actor)
		VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11, $12, CASE WHEN $10 = 'sent' THEN clock_timestamp() END, $13, $14, $15)
		RETURNING id`,
		cur.ParticipantID, cur.ID, attemptID, d.tpl.ID, string(d.tpl.Purpose), string(ch), d.recipient, d.msg.Subject, d.msg.Body,
		string(status), d.sendAt, d.held, batchID, actorID, a.Label()).Scan(&id)
	if err != nil {
		return 0, err
	}
	return id, audit(ctx, tx, a, "message.queue", "message", strconv.FormatInt(id, 10), nil, map[string]any{
		"case_id": cur.ID, "participant_id": cur.ParticipantID, "study_id": cur.StudyID, "channel": ch, "purpose": d.tpl.Purpose,
		"template_id": d.tpl.ID, "template_version": d.tpl.Version, "status": status, "send_after": d.sendAt.UTC(), "held": d.held,
		"letter_batch_id": batchID})
}

// QueueMessage writes a message to the outbox on case id, with its contact
// attempt and its sending job, in one transaction, if the case is still at
// the version the person saw. A refusal says why nothing was sent.
func (s *Store) QueueMessage(ctx context.Context, a cohort.Actor, id int64, in MessageInput) (QueuedMessage, error) {
	var out QueuedMessage
	_, err := s.oneCaseEdit(ctx, a, id, in.Version, s.messageEdit(a, in, false, &out))
	return out, err
}

// SkippedCase is a selected case the desk did not write to, and why.
type SkippedCase struct {
	CaseID  int64
	StudyID string
	Reason  string
}

// BulkMessages is what a bulk send did.
type BulkMessages struct {
	Queued  []QueuedMessage
	Skipped []SkippedCase
}

// QueueMessages writes the same purpose and channel to the outbox for many
// cases in one transaction. A case the message cannot go to (the
// participant's preferences, a missing detail) is skipped with the reason
// and the others are sent; a stale selection (a case changed since the list
// was shown) refuses the whole request, nothing being sent.
func (s *Store) QueueMessages(ctx context.Context, a cohort.Actor, refs []CaseRef, p outreach.Purpose, ch followup.Channel) (BulkMessages, error) {
	var out BulkMessages
	refs, err := bulkRefs(refs)
	if err != nil {
		return out, err
	}
	err = s.inTx(ctx, func(tx pgx.Tx) error {
		for _, r := range refs {
			sp, err := tx.Begin(ctx)
			if err != nil {
				return err
			}
			var q QueuedMessage
			_, err = s.editCase(ctx, sp, a, r.ID, r.Version, s.messageEdit(a, MessageInput{Version: r.Version, Purpose: p, Channel: ch}, true, &q))
			var ve *cohort.ValidationError
			if errors.As(err, &ve) {
				if rerr := sp.Rollback(ctx); rerr != nil {
					return rerr
				}
				sk := SkippedCase{CaseID: r.ID, Reason: ve.Error()}
				for _, f := range []string{"channel", "message", "purpose", "state"} {
					if m, ok := ve.Fields[f]; ok {
						sk.Reason = m
						break
					}
				}
				_ = tx.QueryRow(ctx, `SELECT p.study_id FROM cases c JOIN participants p ON p.id = c.participant_id WHERE c.id = $1`, r.ID).Scan(&sk.StudyID)
				out.Skipped = append(out.Skipped, sk)
				continue
			}
			if err != nil {
				_ = sp.Rollback(ctx)
				return bulkErr(r.ID, err)
			}
			if err := sp.Commit(ctx); err != nil {
				return err
			}
			out.Queued = append(out.Queued, q)
		}
		return nil
	})
	if err != nil {
		return BulkMessages{}, mapCaseErr("bulk messages", err)
	}
	return out, nil
}
