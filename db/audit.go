package db

import (
	"context"
	"encoding/json"
	"fmt"
	"strings"
	"time"

	"cohortdesk/cohort"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgconn"
)

// AuditEvent is one row of the append-only audit trail.
type AuditEvent struct {
	ID         int64
	At         time.Time
	ActorID    int64
	Actor      string
	Action     string
	ObjectType string
	ObjectID   string
	// StudyID is the study ID of the participant the object belongs to (a
	// participant, or their case, recording, referral), "" for other objects.
	StudyID    string
	Old        json.RawMessage
	New        json.RawMessage
	ClientAddr string
	RequestID  string
}

// audit writes one event inside the caller's transaction, so the change and its
// record commit or fail together. old and new are marshalled to JSON (nil stays
// NULL).
func audit(ctx context.Context, tx execer, a cohort.Actor, action, objType, objID string, old, new any) error {
	args, err := auditArgs(ctx, a, action, objType, objID, old, new)
	if err != nil {
		return err
	}
	if _, err = tx.Exec(ctx, auditInsert, args...); err != nil {
		return fmt.Errorf("db: audit %s: %w", action, err)
	}
	return nil
}

// execer is a transaction or the pool, for a write of one statement.
type execer interface {
	Exec(ctx context.Context, sql string, args ...any) (pgconn.CommandTag, error)
}

// auditInsert writes one audit event ($1..$10 from auditArgs).
const auditInsert = `
		INSERT INTO audit_events (at, actor_id, actor, action, object_type, object_id, old_value, new_value, client_addr, request_id)
		VALUES (coalesce($10::timestamptz, now()), $1, $2, $3, $4, $5, $6, $7, $8, $9)`

// auditArgs are auditInsert's arguments.
func auditArgs(ctx context.Context, a cohort.Actor, action, objType, objID string, old, new any) ([]any, error) {
	oldJ, err := toJSON(old)
	if err != nil {
		return nil, err
	}
	newJ, err := toJSON(new)
	if err != nil {
		return nil, err
	}
	var actorID *int64
	if a.UserID != 0 {
		actorID = &a.UserID
	}
	var at any // NULL: the database's clock
	if clk, ok := ctx.Value(historyClockKey{}).(func() time.Time); ok {
		at = clk()
	}
	return []any{actorID, a.Label(), action, objType, objID, oldJ, newJ, a.Addr, a.RequestID, at}, nil
}

type historyClockKey struct{}

// WithHistoryClock marks ctx as entering past events: audit events written
// under it carry clock's time instead of the database's. Only the demo loader
// uses it, to lay down a fictional study's history with the times it happened;
// the application never does.
func WithHistoryClock(ctx context.Context, clock func() time.Time) context.Context {
	return context.WithValue(ctx, historyClockKey{}, clock)
}

func toJSON(v any) ([]byte, error) {
	if v == nil {
		return nil, nil
	}
	if b, ok := v.(json.RawMessage); ok {
		return b, nil
	}
	b, err := json.Marshal(v)
	if err != nil {
		return nil, fmt.Errorf("db: audit value: %w", err)
	}
	return b, nil
}

// Audit records an event on its own, for things that change nothing else
// (sign-in, sign-out, a view of PHI, a download).
// It is one statement, committed on its own.
func (s *Store) Audit(ctx context.Context, a cohort.Actor, action, objType, objID string, old, new any) error {
	return mapErr("record audit event", audit(ctx, s.pool, a, action, objType, objID, old, new))
}

// AuditFilter narrows the audit list.
type AuditFilter struct {
	Action  string // prefix, e.g. "case." or "signin"
	ActorID int64
	// Who finds events by the person who caused them: a part of their name
	// or e-mail address (any letter case), or their account number.
	Who        string
	ObjectType string
	ObjectID   string
	// StudyID finds the events about one participant and everything of
	// theirs (cases, recordings, referral summaries), any letter case.
	StudyID  string
	From, To time.Time // zero means open
	BeforeID int64     // keyset: events with a smaller id
	Limit    int
}

func (f AuditFilter) where() (string, []any) {
	var conds []string
	var args []any
	add := func(cond string, v any) {
		args = append(args, v)
		conds = append(conds, fmt.Sprintf(cond, len(args)))
	}
	if f.Action != "" {
		add("action LIKE $%d || '%%'", strings.ReplaceAll(strings.ReplaceAll(f.Action, "%", `\%`), "_", `\_`))
	}
	if f.ActorID != 0 {
		add("actor_id = $%d", f.ActorID)
	}
	if w := strings.TrimSpace(f.Who); w != "" {
		add(whoCondition, escapeLike(w))
	}
	if sid := strings.TrimSpace(f.StudyID); sid != "" {
		add(studyIDCondition, sid)
	}
	if f.ObjectType != "" {
		add("object_type = $%d", f.ObjectType)
	}
	if f.ObjectID != "" {
		add("object_id = $%d", f.ObjectID)
	}
	if !f.From.IsZero() {
		add("at >= $%d", f.From)
	}
	if !f.To.IsZero() {
		add("at < $%d", f.To)
	}
	if f.BeforeID > 0 {
		add("id < $%d", f.BeforeID)
	}
	if len(conds) == 0 {
		return "", args
	}
	return "WHERE " + strings.Join(conds, " AND "), args
}

// AuditEvents lists events newest first.
func (s *Store) AuditEvents(ctx context.Context, f AuditFilter) ([]AuditEvent, error) {
	if f.Limit <= 0 || f.Limit > 10000 {
		f.Limit = 100
	}
	where, args := f.where()
	args = append(args, f.Limit)
	rows, err := s.reader(ctx).Query(ctx, `
		SELECT id, at, coalesce(actor_id, 0), actor, action, object_type, object_id, `+auditStudyID+`,
		       old_value, new_value, client_addr, request_id
		FROM audit_events e `+where+fmt.Sprintf(` ORDER BY id DESC LIMIT $%d`, len(args)), args...)
	if err != nil {
		return nil, mapErr("audit list", err)
	}
	return pgx.CollectRows(rows, scanAudit)
}

// EachAuditEvent streams every event matching f (ignoring Limit), oldest first,
// for CSV downloads of any size.
func (s *Store) EachAuditEvent(ctx context.Context, f AuditFilter, fn func(AuditEvent) error) error {
	where, args := f.where()
	rows, err := s.reader(ctx).Query(ctx, `
		SELECT id, at, coalesce(actor_id, 0), actor, action, object_type, object_id, `+auditStudyID+`,
		       old_value, new_value, client_addr, request_id
		FROM audit_events e `+where+` ORDER BY id`, args...)
	if err != nil {
		return mapErr("audit export", err)
	}
	defer rows.Close()
	for rows.Next() {
		e, err := scanAudit(rows)
		if err != nil {
			return err
		}
		if err := fn(e); err != nil {
			return err
		}
	}
	return mapErr("audit export", rows.Err())
}

func scanAudit(row pgx.CollectableRow) (AuditEvent, error) {
	var e AuditEvent
	err := row.Scan(&e.ID, &e.At, &e.ActorID, &e.Actor, &e.Action, &e.ObjectType, &e.ObjectID, &e.StudyID,
		&e.Old, &e.New, &e.ClientAddr, &e.RequestID)
	return e, err
}
