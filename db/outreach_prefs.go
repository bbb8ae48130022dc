package db

import (
	"context"
	"errors"
	"fmt"
	"strconv"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
	"cohortdesk/cohort/outreach"

	"github.com/jackc/pgx/v5"
)

// Contact preferences of participants (outreach.Preferences): one row per
// participant once someone records them; without a row the defaults apply.
// They hold no identifying details, so every role that works cases may read
// them; changing them is audited.

// ContactPreferences is a participant's preferences as stored.
type ContactPreferences struct {
	outreach.Preferences
	Version   int // 0 while nothing is recorded
	UpdatedAt time.Time
	UpdatedBy string
}

const prefCols = `preferred_channel, phone_consent, email_consent, text_consent, letter_consent,
	phone_opt_out_at IS NOT NULL, email_opt_out_at IS NOT NULL, text_opt_out_at IS NOT NULL, letter_opt_out_at IS NOT NULL,
	quiet_from, quiet_until, version, updated_at, updated_by`

// prefChannels are the channels in the order of the consent and opt-out
// columns.
var prefChannels = []followup.Channel{followup.ChannelPhone, followup.ChannelEmail, followup.ChannelText, followup.ChannelLetter}

func scanPrefs(row pgx.Row) (ContactPreferences, error) {
	var p ContactPreferences
	var preferred string
	var consent, opted [4]bool
	var from, until int16
	err := row.Scan(&preferred, &consent[0], &consent[1], &consent[2], &consent[3], &opted[0], &opted[1], &opted[2], &opted[3],
		&from, &until, &p.Version, &p.UpdatedAt, &p.UpdatedBy)
	if errors.Is(err, pgx.ErrNoRows) {
		return ContactPreferences{Preferences: outreach.Defaults()}, nil
	}
	if err != nil {
		return p, err
	}
	p.Recorded = true
	p.Preferred = followup.Channel(preferred)
	p.Consent, p.OptedOut = map[followup.Channel]bool{}, map[followup.Channel]bool{}
	for i, c := range prefChannels {
		p.Consent[c], p.OptedOut[c] = consent[i], opted[i]
	}
	p.QuietFrom, p.QuietUntil = outreach.Clock(from), outreach.Clock(until)
	return p, nil
}

func contactPreferences(ctx context.Context, q rowQuerier, participantID int64) (ContactPreferences, error) {
	return scanPrefs(q.QueryRow(ctx, `SELECT `+prefCols+` FROM contact_preferences WHERE participant_id = $1`, participantID))
}

// ContactPreferences returns a participant's preferences, or the defaults.
func (s *Store) ContactPreferences(ctx context.Context, participantID int64) (ContactPreferences, error) {
	p, err := contactPreferences(ctx, s.pool, participantID)
	return p, mapErr("contact preferences", err)
}

// prefAudit is the audited shape of preferences.
func prefAudit(p outreach.Preferences) map[string]any {
	consent, opted := map[string]bool{}, map[string]bool{}
	for _, c := range prefChannels {
		consent[string(c)], opted[string(c)] = p.Consent[c], p.OptedOut[c]
	}
	return map[string]any{"preferred": p.Preferred, "consent": consent, "opted_out": opted,
		"quiet_from": p.QuietFrom.String(), "quiet_until": p.QuietUntil.String()}
}

// SaveContactPreferences records a participant's preferences if nobody
// changed them since version (0: none were recorded), after
// outreach.Preferences.Check; an opt-out keeps the moment it was first
// recorded. Audited with the old and new values.
func (s *Store) SaveContactPreferences(ctx context.Context, a cohort.Actor, participantID int64, version int, p outreach.Preferences) (ContactPreferences, error) {
	if err := p.Check(); err != nil {
		return ContactPreferences{}, err
	}
	var out ContactPreferences
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		var exists bool
		if err := tx.QueryRow(ctx, `SELECT true FROM participants WHERE id = $1 FOR UPDATE`, participantID).Scan(&exists); err != nil {
			return err
		}
		old, err := contactPreferences(ctx, tx, participantID)
		if err != nil {
			return err
		}
		if old.Version != version {
			return &cohort.ConflictError{Message: fmt.Sprintf("%s changed these contact preferences after you opened them; reload and make your change again", old.UpdatedBy)}
		}
		now := s.now()
		optAt := func(c followup.Channel) any {
			if !p.OptedOut[c] {
				return nil
			}
			return now
		}
		_, err = tx.Exec(ctx, `
			INSERT INTO contact_preferences (participant_id, preferred_channel, phone_consent, email_consent, text_consent, letter_consent,
			  phone_opt_out_at, email_opt_out_at, text_opt_out_at, letter_opt_out_at, quiet_from, quiet_until, version, updated_at, updated_by)
			VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11, $12, 1, $13, $14)
			ON CONFLICT (participant_id) DO UPDATE SET preferred_channel = $2, phone_consent = $3, email_consent = $4, text_consent = $5,
			  letter_consent = $6,
			  phone_opt_out_at = CASE WHEN $7::timestamptz IS NULL THEN NULL ELSE coalesce(contact_preferences.phone_opt_out_at, $7) END,
			  email_opt_out_at = CASE WHEN $8::timestamptz IS NULL THEN NULL ELSE coalesce(contact_preferences.email_opt_out_at, $8) END,
			  text_opt_out_at = CASE WHEN $9::timestamptz IS NULL THEN NULL ELSE coalesce(contact_preferences.text_opt_out_at, $9) END,
			  letter_opt_out_at = CASE WHEN $10::timestamptz IS NULL THEN NULL ELSE coalesce(contact_preferences.letter_opt_out_at, $10) END,
			  quiet_from = $11, quiet_until = $12, version = contact_preferences.version + 1, updated_at = $13, updated_by = $14`,
			participantID, string(p.Preferred), p.Consent[followup.ChannelPhone], p.Consent[followup.ChannelEmail], p.Consent[followup.ChannelText],
			p.Consent[followup.ChannelLetter], optAt(followup.ChannelPhone), optAt(followup.ChannelEmail), optAt(followup.ChannelText),
			optAt(followup.ChannelLetter), int16(p.QuietFrom), int16(p.QuietUntil), now, a.Label())
		if err != nil {
			return err
		}
		if out, err = contactPreferences(ctx, tx, participantID); err != nil {
			return err
		}
		var before any
		if old.Recorded {
			before = prefAudit(old.Preferences)
		}
		return audit(ctx, tx, a, "participant.contact_preferences", "participant", strconv.FormatInt(participantID, 10), before, prefAudit(out.Preferences))
	})
	if err != nil {
		return ContactPreferences{}, mapCaseErr("save contact preferences", err)
	}
	return out, nil
}
