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

// The study's message templates and its word list. A template is saved once
// and never changed (a trigger refuses it): editing saves the next version
// of its purpose and channel, and the newest version is the one in use. A
// message records the version it was made from.

// templateLockKey serialises the numbering of template versions.
const templateLockKey = 0x636f68746d706c // "cohtmpl"

// MessageTemplate is one saved version of a template.
type MessageTemplate struct {
	ID      int
	Version int
	outreach.Template
	Note      string
	CreatedAt time.Time
	CreatedBy string
}

// Label names the version, e.g. "first contact by e-mail, v2".
func (t MessageTemplate) Label() string {
	return t.Purpose.Label() + " by " + t.Channel.Label() + ", v" + strconv.Itoa(t.Version)
}

const templateCols = `id, purpose, channel, version, subject, body, reply_days, note, created_at, created_by`

func scanTemplate(row pgx.Row) (MessageTemplate, error) {
	var t MessageTemplate
	var purpose, channel string
	var days int16
	err := row.Scan(&t.ID, &purpose, &channel, &t.Version, &t.Subject, &t.Body, &days, &t.Note, &t.CreatedAt, &t.CreatedBy)
	t.Purpose, t.Channel, t.ReplyDays = outreach.Purpose(purpose), followup.Channel(channel), int(days)
	return t, err
}

// EnsureDefaultTemplates saves the default wording (outreach.DefaultTemplates)
// as version 1 of every purpose and channel that has no template yet. It
// runs at every start-up, so it is idempotent; an administrator's versions
// are never touched.
func (s *Store) EnsureDefaultTemplates(ctx context.Context) error {
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		if _, err := tx.Exec(ctx, `SELECT pg_advisory_xact_lock($1)`, int64(templateLockKey)); err != nil {
			return err
		}
		for _, t := range outreach.DefaultTemplates() {
			var id int
			err := tx.QueryRow(ctx, `INSERT INTO message_templates (purpose, channel, version, subject, body, reply_days, note, created_by)
				SELECT $1, $2, 1, $3, $4, $5, 'the shipped default wording', 'system'
				WHERE NOT EXISTS (SELECT 1 FROM message_templates WHERE purpose = $1 AND channel = $2)
				RETURNING id`, string(t.Purpose), string(t.Channel), t.Subject, t.Body, t.ReplyDays).Scan(&id)
			if errors.Is(err, pgx.ErrNoRows) {
				continue
			}
			if err != nil {
				return err
			}
			if err := audit(ctx, tx, cohort.System, "template.create", "message_template", strconv.Itoa(id), nil, templateAudit(t, 1, "")); err != nil {
				return err
			}
		}
		return nil
	})
	return mapErr("ensure default templates", err)
}

// templateAudit is the audited shape of a template version.
func templateAudit(t outreach.Template, version int, note string) map[string]any {
	return map[string]any{"purpose": t.Purpose, "channel": t.Channel, "version": version, "subject": t.Subject,
		"body": t.Body, "reply_days": t.ReplyDays, "note": note}
}

// MessageTemplates lists the version in use (the newest) of every purpose
// and channel, in the order of outreach.Purposes and SendableChannels.
func (s *Store) MessageTemplates(ctx context.Context) ([]MessageTemplate, error) {
	rows, err := s.pool.Query(ctx, `SELECT DISTINCT ON (purpose, channel) `+templateCols+`
		FROM message_templates ORDER BY purpose, channel, version DESC`)
	if err != nil {
		return nil, mapErr("message templates", err)
	}
	got, err := pgx.CollectRows(rows, func(r pgx.CollectableRow) (MessageTemplate, error) { return scanTemplate(r) })
	if err != nil {
		return nil, mapErr("message templates", err)
	}
	var out []MessageTemplate
	for _, p := range outreach.Purposes() {
		for _, c := range outreach.SendableChannels() {
			for _, t := range got {
				if t.Purpose == p && t.Channel == c {
					out = append(out, t)
				}
			}
		}
	}
	return out, nil
}

// MessageTemplate returns one version.
func (s *Store) MessageTemplate(ctx context.Context, id int) (MessageTemplate, error) {
	t, err := scanTemplate(s.pool.QueryRow(ctx, `SELECT `+templateCols+` FROM message_templates WHERE id = $1`, id))
	return t, mapErr("message template", err)
}

// TemplateVersions lists every version of one purpose and channel, newest
// first.
func (s *Store) TemplateVersions(ctx context.Context, p outreach.Purpose, c followup.Channel) ([]MessageTemplate, error) {
	rows, err := s.pool.Query(ctx, `SELECT `+templateCols+` FROM message_templates WHERE purpose = $1 AND channel = $2 ORDER BY version DESC`, string(p), string(c))
	if err != nil {
		return nil, mapErr("template versions", err)
	}
	out, err := pgx.CollectRows(rows, func(r pgx.CollectableRow) (MessageTemplate, error) { return scanTemplate(r) })
	return out, mapErr("template versions", err)
}

// currentTemplate reads the version in use for purpose p on channel c inside
// tx; a missing template is refused in words.
func currentTemplate(ctx context.Context, tx pgx.Tx, p outreach.Purpose, c followup.Channel) (MessageTemplate, error) {
	t, err := scanTemplate(tx.QueryRow(ctx, `SELECT `+templateCols+` FROM message_templates
		WHERE purpose = $1 AND channel = $2 ORDER BY version DESC LIMIT 1`, string(p), string(c)))
	if errors.Is(err, pgx.ErrNoRows) {
		return t, &cohort.ValidationError{Fields: map[string]string{"purpose": fmt.Sprintf("there is no %s template for %s yet (Administration, message templates)", c.Label(), p.Label())}}
	}
	return t, err
}

// TemplateInput is a new version as an administrator writes it.
type TemplateInput struct {
	outreach.Template
	Note string
	// BasedOn is the version the editor started from (0: none); a newer
	// version saved meanwhile makes the save a stale copy.
	BasedOn int
	// Confirmed: the editor has seen the word-list warnings and saves anyway.
	Confirmed bool
}

// ErrWordWarnings is returned (wrapped in a *WordWarnings) when a template
// uses words of the list and the editor has not confirmed them.
var ErrWordWarnings = errors.New("the template uses words of the study's list")

// WordWarnings lists the words of the list a template uses, for the editor.
type WordWarnings struct {
	Warnings []outreach.Warning
}

// Error words the warnings.
func (w *WordWarnings) Error() string {
	parts := make([]string, len(w.Warnings))
	for i, x := range w.Warnings {
		parts[i] = x.String()
	}
	return strings.Join(parts, "; ")
}

// Unwrap lets errors.Is(err, ErrWordWarnings) match.
func (w *WordWarnings) Unwrap() error { return ErrWordWarnings }

// SaveTemplate saves the next version of a purpose and channel after
// outreach.Template.Check; words of the study's list in the body stop the
// save with a *WordWarnings until the editor confirms them. It returns the
// saved version, audited.
func (s *Store) SaveTemplate(ctx context.Context, a cohort.Actor, in TemplateInput) (MessageTemplate, error) {
	in.Subject, in.Body, in.Note = strings.TrimSpace(in.Subject), strings.TrimSpace(strings.ReplaceAll(in.Body, "\r\n", "\n")), strings.TrimSpace(in.Note)
	var out MessageTemplate
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		words, err := outreachWords(ctx, tx)
		if err != nil {
			return err
		}
		if err := in.Check(words); err != nil {
			return err
		}
		if len(in.Note) > 500 {
			return &cohort.ValidationError{Fields: map[string]string{"note": "use at most 500 characters"}}
		}
		st, err := studySettings(ctx, tx)
		if err != nil {
			return err
		}
		study := outreach.Values{outreach.StudyName: st.Name, outreach.ContactLine: outreach.ContactLineOf(st.ContactRoute)}
		if w := append(in.Warnings(words), in.ValueWarnings(words, study)...); len(w) > 0 && !in.Confirmed {
			return &WordWarnings{Warnings: w}
		}
		if _, err := tx.Exec(ctx, `SELECT pg_advisory_xact_lock($1)`, int64(templateLockKey)); err != nil {
			return err
		}
		var latest int
		if err := tx.QueryRow(ctx, `SELECT coalesce(max(version), 0) FROM message_templates WHERE purpose = $1 AND channel = $2`,
			string(in.Purpose), string(in.Channel)).Scan(&latest); err != nil {
			return err
		}
		if in.BasedOn != 0 && in.BasedOn != latest {
			return &cohort.ConflictError{Message: fmt.Sprintf("version %d of this template was saved after you opened version %d; open it, check its wording and make your change again", latest, in.BasedOn)}
		}
		out, err = scanTemplate(tx.QueryRow(ctx, `INSERT INTO message_templates (purpose, channel, version, subject, body, reply_days, note, created_by)
			VALUES ($1, $2, $3, $4, $5, $6, $7, $8) RETURNING `+templateCols,
			string(in.Purpose), string(in.Channel), latest+1, in.Subject, in.Body, in.ReplyDays, in.Note, a.Label()))
		if err != nil {
			return err
		}
		old := any(nil)
		if latest > 0 {
			old = map[string]any{"version": latest}
		}
		return audit(ctx, tx, a, "template.create", "message_template", strconv.Itoa(out.ID), old, templateAudit(in.Template, out.Version, in.Note))
	})
	if err != nil {
		var ww *WordWarnings
		if errors.As(err, &ww) {
			return MessageTemplate{}, ww
		}
		return MessageTemplate{}, mapCaseErr("save template", err)
	}
	return out, nil
}

// outreachWords reads the study's word list (the defaults until saved).
func outreachWords(ctx context.Context, q rowQuerier) (outreach.WordList, error) {
	var terms []string
	err := q.QueryRow(ctx, `SELECT words FROM outreach_settings WHERE id = 1`).Scan(&terms)
	if errors.Is(err, pgx.ErrNoRows) {
		return outreach.DefaultWords(), nil
	}
	return outreach.WordList{Terms: terms}, err
}

// OutreachWords returns the study's word list.
func (s *Store) OutreachWords(ctx context.Context) (outreach.WordList, error) {
	w, err := outreachWords(ctx, s.pool)
	return w, mapErr("word list", err)
}

// SaveOutreachWords replaces the study's word list, audited.
func (s *Store) SaveOutreachWords(ctx context.Context, a cohort.Actor, w outreach.WordList) error {
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		old, err := outreachWords(ctx, tx)
		if err != nil {
			return err
		}
		terms := w.Terms
		if terms == nil {
			terms = []string{}
		}
		if _, err := tx.Exec(ctx, `INSERT INTO outreach_settings (id, words, updated_by) VALUES (1, $1, $2)
			ON CONFLICT (id) DO UPDATE SET words = $1, updated_by = $2, updated_at = now()`, terms, a.Label()); err != nil {
			return err
		}
		return audit(ctx, tx, a, "outreach.words", "study", "1", map[string]any{"words": old.Terms}, map[string]any{"words": terms})
	})
	return mapErr("save word list", err)
}

// TemplatePreview makes template version id out for the participant with
// the given study ID, as a message sent now would read: their names, their
// latest case's tracking number, the study's name and contact route, the
// reply-by day. The participant's details are read with the actor's rights
// and the view is audited. A value the template needs and the participant
// lacks is refused with the reason.
func (s *Store) TemplatePreview(ctx context.Context, a cohort.Actor, id int, studyID string) (outreach.Message, error) {
	var out outreach.Message
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		t, err := scanTemplate(tx.QueryRow(ctx, `SELECT `+templateCols+` FROM message_templates WHERE id = $1`, id))
		if err != nil {
			return err
		}
		var pid int64
		var tracking string
		err = tx.QueryRow(ctx, `SELECT p.id, coalesce((SELECT c.tracking_number FROM cases c WHERE c.participant_id = p.id ORDER BY c.id DESC LIMIT 1), '')
			FROM participants p WHERE p.study_id = $1`, strings.TrimSpace(studyID)).Scan(&pid, &tracking)
		if errors.Is(err, pgx.ErrNoRows) {
			return &cohort.ValidationError{Fields: map[string]string{"participant": fmt.Sprintf("no participant has the study ID %q", strings.TrimSpace(studyID))}}
		}
		if err != nil {
			return err
		}
		st, err := studySettings(ctx, tx)
		if err != nil {
			return err
		}
		ident, err := identityIn(ctx, tx, a, pid, "template preview")
		if err != nil {
			return err
		}
		out, err = t.Render(outreach.Values{outreach.FirstName: ident.GivenName, outreach.FamilyName: ident.FamilyName,
			outreach.StudyName: st.Name, outreach.ContactLine: outreach.ContactLineOf(st.ContactRoute), outreach.StudyNumber: strings.TrimSpace(studyID),
			outreach.TrackingNumber: tracking, outreach.ReplyBy: outreach.WrittenDay(outreach.ReplyDay(st.Calendar(), s.now(), t.ReplyDays))})
		return err
	})
	return out, mapCaseErr("template preview", err)
}
