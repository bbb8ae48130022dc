package db

import (
	"context"
	"fmt"
	"strconv"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
	"cohortdesk/cohort/outreach"

	"github.com/jackc/pgx/v5"
)

// Messages as pages read them. A message's recipient and body hold the
// participant's details, so they are read only by MessageContent, for roles
// that see PHI, and every such read is audited; the rest (channel, purpose,
// template version, status, the server's answer) may be shown beside the
// case.

// Message is a message without its recipient and body.
type Message struct {
	ID              int64
	ParticipantID   int64
	CaseID          int64
	StudyID         string
	Channel         followup.Channel
	Purpose         outreach.Purpose
	TemplateID      int
	TemplateVersion int
	Subject         string // fixed text of the template: no personal details
	Key             string // Message-ID / idempotency key
	Status          outreach.Status
	SendAfter       time.Time
	Held            bool
	Tries           int
	Resent          bool
	SentAt          time.Time
	StatusAt        time.Time
	Detail          string
	ProviderRef     string
	LetterBatch     int64
	Actor           string
	CreatedAt       time.Time
}

const messageCols = `m.id, m.participant_id, m.case_id, p.study_id, m.channel, m.purpose, m.template_id, t.version, m.subject,
	m.idempotency_key::text, m.status, m.send_after, m.held, m.tries, m.resent, m.sent_at, m.status_at, m.detail, m.provider_ref,
	coalesce(m.letter_batch_id, 0), m.actor, m.created_at`

const messageFrom = `messages m JOIN participants p ON p.id = m.participant_id JOIN message_templates t ON t.id = m.template_id`

func scanMessage(row pgx.Row) (Message, error) {
	var m Message
	var ch, purpose, status string
	var tries int16
	var sent *time.Time
	err := row.Scan(&m.ID, &m.ParticipantID, &m.CaseID, &m.StudyID, &ch, &purpose, &m.TemplateID, &m.TemplateVersion, &m.Subject,
		&m.Key, &status, &m.SendAfter, &m.Held, &tries, &m.Resent, &sent, &m.StatusAt, &m.Detail, &m.ProviderRef,
		&m.LetterBatch, &m.Actor, &m.CreatedAt)
	m.Channel, m.Purpose, m.Status, m.Tries, m.SentAt = followup.Channel(ch), outreach.Purpose(purpose), outreach.Status(status), int(tries), timeOf(sent)
	return m, err
}

func collectMessages(rows pgx.Rows, err error) ([]Message, error) {
	if err != nil {
		return nil, err
	}
	return pgx.CollectRows(rows, func(r pgx.CollectableRow) (Message, error) { return scanMessage(r) })
}

// Message returns one message without its recipient and body.
func (s *Store) Message(ctx context.Context, id int64) (Message, error) {
	m, err := scanMessage(s.pool.QueryRow(ctx, `SELECT `+messageCols+` FROM `+messageFrom+` WHERE m.id = $1`, id))
	return m, mapErr("message", err)
}

// CaseMessages lists a case's messages, newest first.
func (s *Store) CaseMessages(ctx context.Context, caseID int64) ([]Message, error) {
	out, err := collectMessages(s.pool.Query(ctx, `SELECT `+messageCols+` FROM `+messageFrom+` WHERE m.case_id = $1 ORDER BY m.id DESC`, caseID))
	return out, mapErr("case messages", err)
}

// caseMessages is CaseMessages inside a transaction, for the case timeline.
func caseMessages(ctx context.Context, tx pgx.Tx, caseID int64) ([]Message, error) {
	return collectMessages(tx.Query(ctx, `SELECT `+messageCols+` FROM `+messageFrom+` WHERE m.case_id = $1 ORDER BY m.id`, caseID))
}

// MessageContent is what a message said and to whom: PHI.
type MessageContent struct {
	Recipient string
	Subject   string
	Body      string
}

// MessageContent returns a message's recipient and body to a role that sees
// PHI, and records the view in the audit trail as a view of the
// participant's details.
func (s *Store) MessageContent(ctx context.Context, a cohort.Actor, id int64) (Message, MessageContent, error) {
	if !a.Role.SeesPHI() {
		return Message{}, MessageContent{}, fmt.Errorf("db: message content: role %s: %w", a.Role, cohort.ErrForbidden)
	}
	var m Message
	var c MessageContent
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		var err error
		if m, err = scanMessage(tx.QueryRow(ctx, `SELECT `+messageCols+` FROM `+messageFrom+` WHERE m.id = $1`, id)); err != nil {
			return err
		}
		if err := tx.QueryRow(ctx, `SELECT recipient, subject, body FROM messages WHERE id = $1`, id).Scan(&c.Recipient, &c.Subject, &c.Body); err != nil {
			return err
		}
		return audit(ctx, tx, a, "participant.view_phi", "participant", strconv.FormatInt(m.ParticipantID, 10), nil,
			map[string]any{"purpose": "message " + strconv.FormatInt(id, 10)})
	})
	return m, c, mapErr("message content", err)
}

// OutboxFilter picks messages for the outbox page.
type OutboxFilter struct {
	Status outreach.Status // "" for all
	Limit  int             // default 100
}

// Outbox is the outbox page: recent messages and counts by status.
type Outbox struct {
	Rows   []Message
	Counts map[outreach.Status]int
}

// Outbox lists the most recent messages (newest first) with the count of
// every status (kept as messages change, migration 0093: the page never
// counts the messages table).
func (s *Store) Outbox(ctx context.Context, f OutboxFilter) (Outbox, error) {
	out := Outbox{Counts: map[outreach.Status]int{}}
	if f.Limit <= 0 || f.Limit > 500 {
		f.Limit = 100
	}
	if f.Status != "" && !f.Status.Valid() {
		return out, &cohort.ValidationError{Fields: map[string]string{"status": "choose a status"}}
	}
	rows, err := s.pool.Query(ctx, `SELECT status, sum(n)::int FROM message_status_counts GROUP BY status HAVING sum(n) <> 0`)
	if err != nil {
		return out, mapErr("outbox", err)
	}
	for rows.Next() {
		var st string
		var n int
		if err := rows.Scan(&st, &n); err != nil {
			rows.Close()
			return out, mapErr("outbox", err)
		}
		out.Counts[outreach.Status(st)] = n
	}
	if err := rows.Err(); err != nil {
		return out, mapErr("outbox", err)
	}
	if f.Status == "" {
		out.Rows, err = collectMessages(s.pool.Query(ctx, `SELECT `+messageCols+` FROM `+messageFrom+`
			ORDER BY m.created_at DESC, m.id DESC LIMIT $1`, f.Limit))
	} else {
		out.Rows, err = collectMessages(s.pool.Query(ctx, `SELECT `+messageCols+` FROM `+messageFrom+`
			WHERE m.status = $1 ORDER BY m.created_at DESC, m.id DESC LIMIT $2`, string(f.Status), f.Limit))
	}
	return out, mapErr("outbox", err)
}

// Reach is what the desk knows about reaching one participant, without
// their details: which details are on file, their preferences and zone, and
// their latest message.
type Reach struct {
	State       followup.State // the case's state
	Contact     outreach.Contact
	Preferences ContactPreferences
	Location    *time.Location
	Last        *Message // the newest message of the case asked about, nil when none
}

// Reaches reads Reach for the participants of the given cases, by case id,
// in three queries whatever the number of cases (the triage rows).
func (s *Store) Reaches(ctx context.Context, caseIDs []int64) (map[int64]Reach, error) {
	out := map[int64]Reach{}
	if len(caseIDs) == 0 {
		return out, nil
	}
	rows, err := s.pool.Query(ctx, `
		SELECT c.id, c.state, coalesce(i.email <> '', false), coalesce(i.phone <> '', false), coalesce(i.street <> '' AND i.city <> '', false),
		       p.time_zone, cp.participant_id IS NOT NULL, `+prefColsOf("cp")+`
		FROM cases c JOIN participants p ON p.id = c.participant_id
		LEFT JOIN participant_identity i ON i.participant_id = p.id
		LEFT JOIN contact_preferences cp ON cp.participant_id = p.id
		WHERE c.id = ANY($1)`, caseIDs)
	if err != nil {
		return nil, mapErr("reaches", err)
	}
	for rows.Next() {
		var id int64
		var r Reach
		var tz, state string
		var recorded bool
		var preferred *string
		var consent, opted [4]*bool
		var from, until *int16
		var version *int
		var updatedAt *time.Time
		var updatedBy *string
		if err := rows.Scan(&id, &state, &r.Contact.Email, &r.Contact.Phone, &r.Contact.Address, &tz, &recorded, &preferred,
			&consent[0], &consent[1], &consent[2], &consent[3], &opted[0], &opted[1], &opted[2], &opted[3], &from, &until,
			&version, &updatedAt, &updatedBy); err != nil {
			rows.Close()
			return nil, mapErr("reaches", err)
		}
		r.State = followup.State(state)
		r.Preferences = ContactPreferences{Preferences: outreach.Defaults()}
		if recorded {
			p := outreach.Preferences{Recorded: true, Preferred: followup.Channel(*preferred), Consent: map[followup.Channel]bool{},
				OptedOut: map[followup.Channel]bool{}, QuietFrom: outreach.Clock(*from), QuietUntil: outreach.Clock(*until)}
			for i, c := range prefChannels {
				p.Consent[c], p.OptedOut[c] = *consent[i], *opted[i]
			}
			r.Preferences = ContactPreferences{Preferences: p, Version: *version, UpdatedAt: *updatedAt, UpdatedBy: *updatedBy}
		}
		if r.Location, err = time.LoadLocation(tz); err != nil {
			r.Location = time.UTC
		}
		out[id] = r
	}
	if err := rows.Err(); err != nil {
		return nil, mapErr("reaches", err)
	}
	last, err := collectMessages(s.pool.Query(ctx, `SELECT DISTINCT ON (m.case_id) `+messageCols+` FROM `+messageFrom+`
		WHERE m.case_id = ANY($1) ORDER BY m.case_id, m.id DESC`, caseIDs))
	if err != nil {
		return nil, mapErr("reaches", err)
	}
	for i := range last {
		if r, ok := out[last[i].CaseID]; ok {
			r.Last = &last[i]
			out[last[i].CaseID] = r
		}
	}
	return out, nil
}

// prefColsOf is prefCols on a joined table alias (NULLs when no row).
func prefColsOf(alias string) string {
	return prefixCols(alias+".", `preferred_channel, phone_consent, email_consent, text_consent, letter_consent`) + `, ` +
		alias + `.phone_opt_out_at IS NOT NULL, ` + alias + `.email_opt_out_at IS NOT NULL, ` + alias + `.text_opt_out_at IS NOT NULL, ` +
		alias + `.letter_opt_out_at IS NOT NULL, ` + prefixCols(alias+".", `quiet_from, quiet_until, version, updated_at, updated_by`)
}
