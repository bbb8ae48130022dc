package db

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"io"
	"strings"
)

// The audit trail as people read it: what changed (the fields whose value
// differs between the old and new value, not the stored objects whole), the
// participant an object belongs to by study ID, and filters by person and by
// study ID that say why they find nothing.

// auditStudyID is the study ID of the participant an event's object belongs
// to, for objects that belong to one; ” otherwise.
const auditStudyID = `coalesce(CASE WHEN e.object_id ~ '^[0-9]{1,18}$' THEN
	  CASE e.object_type
	    WHEN 'participant' THEN (SELECT p.study_id FROM participants p WHERE p.id = e.object_id::bigint)
	    WHEN 'case' THEN (SELECT p.study_id FROM cases c JOIN participants p ON p.id = c.participant_id WHERE c.id = e.object_id::bigint)
	    WHEN 'recording' THEN (SELECT p.study_id FROM recordings r JOIN participants p ON p.id = r.participant_id WHERE r.id = e.object_id::bigint)
	    WHEN 'referral' THEN (SELECT p.study_id FROM referrals f JOIN participants p ON p.id = f.participant_id WHERE f.id = e.object_id::bigint)
	  END END, '')`

// studyIDCondition keeps the events about the participant with study ID $N
// and about their cases, recordings and referral summaries; each pair is
// found through the object index.
const studyIDCondition = `(e.object_type, e.object_id) IN (
	  SELECT 'participant', p.id::text FROM participants p WHERE lower(p.study_id) = lower($%[1]d)
	  UNION ALL SELECT 'case', c.id::text FROM cases c JOIN participants p ON p.id = c.participant_id WHERE lower(p.study_id) = lower($%[1]d)
	  UNION ALL SELECT 'recording', r.id::text FROM recordings r JOIN participants p ON p.id = r.participant_id WHERE lower(p.study_id) = lower($%[1]d)
	  UNION ALL SELECT 'referral', f.id::text FROM referrals f JOIN participants p ON p.id = f.participant_id WHERE lower(p.study_id) = lower($%[1]d))`

// whoCondition keeps the events caused by a person whose name (as the event
// recorded it, or as the account now has it) or e-mail contains $N, or whose
// account number is $N.
const whoCondition = `(e.actor ILIKE '%%' || $%[1]d || '%%'
	  OR e.actor_id IN (SELECT u.id FROM users u WHERE u.display_name ILIKE '%%' || $%[1]d || '%%' OR u.email ILIKE '%%' || $%[1]d || '%%' OR u.id::text = $%[1]d))`

// AuditFilterProblems says why a filter can find nothing, field by field: no
// person matches the "who" text, no participant has the study ID. A filter
// without such a problem may still match no event.
func (s *Store) AuditFilterProblems(ctx context.Context, f AuditFilter) (map[string]string, error) {
	out := map[string]string{}
	if w := strings.TrimSpace(f.Who); w != "" {
		var n int
		err := s.pool.QueryRow(ctx, `
			SELECT (SELECT count(*) FROM users u WHERE u.display_name ILIKE '%' || $1 || '%' OR u.email ILIKE '%' || $1 || '%' OR u.id::text = $2)
			     + (SELECT count(*) FROM (SELECT 1 FROM audit_events e WHERE e.actor ILIKE '%' || $1 || '%' LIMIT 1) x)`,
			escapeLike(w), w).Scan(&n)
		if err != nil {
			return nil, mapErr("audit filter", err)
		}
		if n == 0 {
			out["who"] = fmt.Sprintf("nobody whose name or e-mail contains %q has an account or appears in the trail", w)
		}
	}
	if sid := strings.TrimSpace(f.StudyID); sid != "" {
		var n int
		if err := s.pool.QueryRow(ctx, `SELECT count(*) FROM participants WHERE lower(study_id) = lower($1)`, sid).Scan(&n); err != nil {
			return nil, mapErr("audit filter", err)
		}
		if n == 0 {
			out["study_id"] = fmt.Sprintf("no participant has the study ID %q (give it whole, e.g. QRW-0173-K)", sid)
		}
	}
	return out, nil
}

// AuditChange is one field an event changed: its path in the stored value
// ("service_levels.MaxAttempts") and its value before and after as text ("" for
// none).
type AuditChange struct {
	Field, Before, After string
}

// Changes lists the fields whose value differs between the event's old and
// new value, in the order the values hold them; for an event that created
// something (no old value) every field of the new one, for one that removed
// something every field of the old one. A case's version counter, which
// every edit moves, is left out.
func (e AuditEvent) Changes() []AuditChange {
	before, after := flattenJSON(e.Old), flattenJSON(e.New)
	old := make(map[string]string, len(before))
	for _, kv := range before {
		old[kv[0]] = kv[1]
	}
	seen := map[string]bool{}
	var out []AuditChange
	for _, kv := range after {
		seen[kv[0]] = true
		if b, ok := old[kv[0]]; !ok || b != kv[1] {
			out = append(out, AuditChange{kv[0], old[kv[0]], kv[1]})
		}
	}
	for _, kv := range before {
		if !seen[kv[0]] && kv[1] != "" {
			out = append(out, AuditChange{kv[0], kv[1], ""})
		}
	}
	kept := out[:0]
	for _, c := range out {
		if c.Field != "version" && !(c.Before == "" && c.After == "") {
			kept = append(kept, c)
		}
	}
	return kept
}

// flattenJSON lists the leaves of a JSON value as (path, text) in document
// order: object keys joined with dots, arrays of plain values as one leaf
// ("3, 5, 8"), arrays of objects by index ("windows[1].minutes"). A value
// that is not an object is one leaf with the empty path; unreadable JSON
// is one leaf holding the text as stored.
func flattenJSON(raw json.RawMessage) [][2]string {
	raw = bytes.TrimSpace(raw)
	if len(raw) == 0 || string(raw) == "null" {
		return nil
	}
	dec := json.NewDecoder(bytes.NewReader(raw))
	dec.UseNumber()
	var out [][2]string
	if err := flattenValue(dec, "", &out); err != nil && err != io.EOF {
		return [][2]string{{"", string(raw)}}
	}
	return out
}

func flattenValue(dec *json.Decoder, path string, out *[][2]string) error {
	tok, err := dec.Token()
	if err != nil {
		return err
	}
	switch t := tok.(type) {
	case json.Delim:
		switch t {
		case '{':
			for dec.More() {
				kt, err := dec.Token()
				if err != nil {
					return err
				}
				key, _ := kt.(string)
				child := key
				if path != "" {
					child = path + "." + key
				}
				if err := flattenValue(dec, child, out); err != nil {
					return err
				}
			}
			_, err := dec.Token() // '}'
			return err
		case '[':
			var plain []string
			var nested [][2]string
			for i := 0; dec.More(); i++ {
				var sub [][2]string
				if err := flattenValue(dec, fmt.Sprintf("%s[%d]", path, i), &sub); err != nil {
					return err
				}
				if len(sub) == 1 && sub[0][0] == fmt.Sprintf("%s[%d]", path, i) {
					plain = append(plain, sub[0][1])
				} else {
					nested = append(nested, sub...)
				}
			}
			if _, err := dec.Token(); err != nil { // ']'
				return err
			}
			if len(nested) == 0 {
				*out = append(*out, [2]string{path, strings.Join(plain, ", ")})
			} else {
				*out = append(*out, nested...)
			}
			return nil
		}
	case nil:
		*out = append(*out, [2]string{path, ""})
	case string:
		*out = append(*out, [2]string{path, t})
	case json.Number:
		*out = append(*out, [2]string{path, t.String()})
	case bool:
		*out = append(*out, [2]string{path, map[bool]string{true: "yes", false: "no"}[t]})
	}
	return nil
}
