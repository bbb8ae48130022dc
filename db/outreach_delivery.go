package db

import (
	"context"
	"errors"
	"strconv"
	"strings"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
	"cohortdesk/cohort/outreach"

	"github.com/jackc/pgx/v5"
)

// The sender's side of the outbox (web/outreach sends; these record). Every
// try of a message is recorded before it starts (BeginTry) and its end after
// (MessageSent, MessageTemporary, MessageNotDelivered). A try whose end was
// never recorded (the process died after handing the message over and before
// recording it) is found by the next try, which sends it again with the same
// Message-ID or idempotency key and marks the message as resent: the
// participant may get a second copy that their mail system or the gateway
// can recognise as the same message, and the case page says so. A message is
// never lost and never sent twice without it being shown.

// Outgoing is a queued message as the sender needs it.
type Outgoing struct {
	Message
	MessageContent
	Preferences outreach.Preferences
	Contact     outreach.Contact
	Location    *time.Location
	Withdrawn   bool
}

// OutgoingMessage reads a message for sending, with what the sender checks
// again before it sends: the participant's preferences and details on file
// now, and whether they withdrew.
func (s *Store) OutgoingMessage(ctx context.Context, id int64) (Outgoing, error) {
	var o Outgoing
	err := pgx.BeginTxFunc(ctx, s.pool, pgx.TxOptions{AccessMode: pgx.ReadOnly}, func(tx pgx.Tx) error {
		var err error
		if o.Message, err = scanMessage(tx.QueryRow(ctx, `SELECT `+messageCols+` FROM `+messageFrom+` WHERE m.id = $1`, id)); err != nil {
			return err
		}
		if err := tx.QueryRow(ctx, `SELECT recipient, subject, body FROM messages WHERE id = $1`, id).
			Scan(&o.Recipient, &o.MessageContent.Subject, &o.Body); err != nil {
			return err
		}
		var withdrawn *time.Time
		if o.Contact, o.Location, withdrawn, err = recipientOf(ctx, tx, o.ParticipantID); err != nil {
			return err
		}
		o.Withdrawn = withdrawn != nil
		p, err := contactPreferences(ctx, tx, o.ParticipantID)
		o.Preferences = p.Preferences
		return err
	})
	return o, mapErr("outgoing message", err)
}

// BeginTry records that a try of a queued message starts and returns its
// number, and whether an earlier try's end is unknown (resend). ok is false
// when the message is no longer queued (another try ended it).
func (s *Store) BeginTry(ctx context.Context, id int64) (tries int, resend, ok bool, err error) {
	var n int16
	err = s.pool.QueryRow(ctx, `
		WITH old AS (SELECT try_state FROM messages WHERE id = $1 AND status = 'queued' FOR UPDATE)
		UPDATE messages m SET tries = m.tries + 1, try_state = 'trying', last_try_at = clock_timestamp(),
		       resent = m.resent OR old.try_state = 'trying'
		FROM old WHERE m.id = $1
		RETURNING m.tries, old.try_state = 'trying'`, id).Scan(&n, &resend)
	if errors.Is(err, pgx.ErrNoRows) {
		return 0, false, false, nil
	}
	if err != nil {
		return 0, false, false, mapErr("begin try", err)
	}
	return int(n), resend, true, nil
}

// MessageSent records that the server or gateway took the message (status
// sent, or delivered when the channel says so), with its answer.
func (s *Store) MessageSent(ctx context.Context, id int64, st outreach.Status, detail, ref string) error {
	if st != outreach.Sent && st != outreach.Delivered {
		return errors.New("db: message sent: status must be sent or delivered")
	}
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		tag, err := tx.Exec(ctx, `UPDATE messages SET status = $2, sent_at = coalesce(sent_at, clock_timestamp()), status_at = clock_timestamp(),
			detail = $3, provider_ref = $4, try_state = '' WHERE id = $1 AND status = 'queued'`, id, string(st), clip(detail, 1000), clip(ref, 200))
		if err != nil || tag.RowsAffected() == 0 {
			return err
		}
		return audit(ctx, tx, cohort.System, "message."+string(st), "message", strconv.FormatInt(id, 10),
			map[string]any{"status": outreach.Queued}, map[string]any{"status": st, "detail": clip(detail, 1000), "provider_ref": ref})
	})
	return mapErr("message sent", err)
}

// MessageTemporary records a try that failed for now; the sender tries
// again later.
func (s *Store) MessageTemporary(ctx context.Context, id int64, detail string) error {
	_, err := s.pool.Exec(ctx, `UPDATE messages SET try_state = 'temporary', detail = $2 WHERE id = $1 AND status = 'queued'`, id, clip(detail, 1000))
	return mapErr("message temporary failure", err)
}

// MessageNotDelivered ends a message that did not reach the participant:
// undeliverable (refused for good) or failed (given up, or no longer
// allowed). The case records it through the edit engine as a system edit:
// the message's contact attempt becomes "not delivered" (which does not
// count as an unanswered attempt), the deadlines are recomputed, and the case
// timeline shows why. A message already delivered is left as it is.
func (s *Store) MessageNotDelivered(ctx context.Context, id int64, st outreach.Status, detail string) error {
	if !st.NotDelivered() {
		return errors.New("db: message not delivered: status must be undeliverable or failed")
	}
	detail = clip(detail, 1000)
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		var caseID, attemptID int64
		var old string
		err := tx.QueryRow(ctx, `SELECT case_id, attempt_id, status FROM messages WHERE id = $1 FOR UPDATE`, id).Scan(&caseID, &attemptID, &old)
		if err != nil {
			return err
		}
		if old != string(outreach.Queued) && old != string(outreach.Sent) {
			return nil
		}
		if _, err := tx.Exec(ctx, `UPDATE messages SET status = $2, status_at = clock_timestamp(), detail = $3, try_state = '' WHERE id = $1`,
			id, string(st), detail); err != nil {
			return err
		}
		if err := audit(ctx, tx, cohort.System, "message."+string(st), "message", strconv.FormatInt(id, 10),
			map[string]any{"status": old}, map[string]any{"status": st, "detail": detail}); err != nil {
			return err
		}
		_, err = s.editCase(ctx, tx, cohort.System, caseID, anyVersion, caseEdit{
			action: followup.EditMessage,
			intent: func(b followup.CaseFields) followup.CaseFields { return b },
			apply: func(ctx context.Context, tx pgx.Tx, cur Case, next *Case, rec *caseSnapshot) error {
				rec.reason = "message " + strconv.FormatInt(id, 10) + " " + st.Label() + ": " + detail
				_, err := tx.Exec(ctx, `UPDATE contact_attempts SET outcome = $2,
					note = left(note || '; not delivered (' || $3 || ')', 2000) WHERE id = $1`,
					attemptID, string(followup.OutcomeUndeliverable), st.Label())
				return err
			},
		})
		return err
	})
	return mapCaseErr("message not delivered", err)
}

// MessageReceipt records a delivery answer a text gateway sends later, found
// by the message's idempotency key: delivered, or not (undeliverable,
// failed). It reports whether the key named a message.
func (s *Store) MessageReceipt(ctx context.Context, key string, st outreach.Status, detail string) (bool, error) {
	var id int64
	err := s.pool.QueryRow(ctx, `SELECT id FROM messages WHERE idempotency_key::text = $1`, strings.ToLower(strings.TrimSpace(key))).Scan(&id)
	if errors.Is(err, pgx.ErrNoRows) {
		return false, nil
	}
	if err != nil {
		return false, mapErr("message receipt", err)
	}
	switch {
	case st == outreach.Delivered:
		err = s.inTx(ctx, func(tx pgx.Tx) error {
			tag, err := tx.Exec(ctx, `UPDATE messages SET status = 'delivered', status_at = clock_timestamp(), sent_at = coalesce(sent_at, clock_timestamp()),
				detail = $2, try_state = '' WHERE id = $1 AND status IN ('queued', 'sent')`, id, clip(detail, 1000))
			if err != nil || tag.RowsAffected() == 0 {
				return err
			}
			return audit(ctx, tx, cohort.System, "message.delivered", "message", strconv.FormatInt(id, 10), nil,
				map[string]any{"status": outreach.Delivered, "detail": clip(detail, 1000), "by": "delivery receipt"})
		})
		return true, mapErr("message receipt", err)
	case st.NotDelivered():
		return true, s.MessageNotDelivered(ctx, id, st, detail)
	}
	return true, &cohort.ValidationError{Fields: map[string]string{"status": "a receipt says delivered, undeliverable or failed"}}
}

// ReconcileMessages fails the queued messages whose sending job has failed
// for good without recording it (the worker died on its last attempt), so
// each case shows that its message did not go. It returns how many.
func (s *Store) ReconcileMessages(ctx context.Context) (int, error) {
	rows, err := s.pool.Query(ctx, `SELECT m.id, j.error FROM messages m JOIN jobs j ON j.id = m.job_id
		WHERE m.status = 'queued' AND j.state = 'failed'`)
	if err != nil {
		return 0, mapErr("reconcile messages", err)
	}
	type stranded struct {
		id  int64
		why string
	}
	got, err := pgx.CollectRows(rows, func(r pgx.CollectableRow) (stranded, error) {
		var x stranded
		err := r.Scan(&x.id, &x.why)
		return x, err
	})
	if err != nil {
		return 0, mapErr("reconcile messages", err)
	}
	for _, x := range got {
		if err := s.MessageNotDelivered(ctx, x.id, outreach.Failed, "the sending job stopped: "+x.why); err != nil {
			return 0, err
		}
	}
	return len(got), nil
}

// clip shortens s to at most n bytes on a rune boundary.
func clip(s string, n int) string {
	if len(s) <= n {
		return s
	}
	for n > 0 && !utf8RuneStart(s[n]) {
		n--
	}
	return s[:n]
}

func utf8RuneStart(b byte) bool { return b&0xC0 != 0x80 }
