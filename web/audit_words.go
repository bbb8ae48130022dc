package web

import (
	"strings"
	"time"
	"unicode"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
	"cohortdesk/db"
)

// The words of the audit trail page: what an action did, which object it
// touched (by study ID where it belongs to a participant), what a stored
// field is called and how its value reads. The stored events keep their
// keys and values as they are; the CSV download gives them whole.

// auditActions words the actions that are not case edits (case edits take
// followup.Edit's labels).
var auditActions = map[string]string{
	"signin":                     "signed in",
	"audit.export":               "downloaded the audit trail",
	"audit.view":                 "read the audit trail",
	"import.readings":            "imported wear data",
	"import.rejects_download":    "downloaded an import's refused rows",
	"over_read.add":              "entered an over-read",
	"participant.enrol":          "enrolled a participant",
	"participant.export_list":    "downloaded the participant list",
	"participant.list_phi":       "viewed names on the participant list",
	"participant.note":           "added a note",
	"participant.update":         "changed a participant's details",
	"participant.view_phi":       "viewed identifying details",
	"participant.withdraw":       "recorded a withdrawal",
	"protocol.activate":          "made a protocol version active",
	"protocol.create":            "created a protocol version",
	"recording.add":              "added an ECG recording",
	"referral.issue":             "issued a referral summary",
	"referral.signoff":           "signed a referral summary off",
	"report.download":            "downloaded the weekly report",
	"screen.enqueue":             "queued screening",
	"screen.run":                 "screened the study",
	"site.create":                "added a site",
	"statistics.download":        "downloaded the agreement statistics",
	"study.second_factor_rule":   "changed the second-factor rule",
	"study.update":               "changed the study settings",
	"sweep.start":                "started a threshold sweep",
	"user.create":                "created an account",
	"user.password_changed":      "changed their password",
	"user.password_set":          "set a password",
	"user.recovery_code_used":    "signed in with a recovery code",
	"user.second_factor_on":      "set up a second factor",
	"user.second_factor_reset":   "reset a second factor",
	"user.update":                "changed an account",
	"verdicts.import":            "imported external verdicts",
	"verdicts.import_failed":     "tried to import external verdicts",
	"export.dataset":             "exported the de-identified dataset",
	"export.referrals":           "exported referral summaries",
	"participant.identity_shown": "viewed identifying details",
	// Written before the threshold sweep had its one name (migration
	// 0010); the stored events keep their key.
	"exploration.start": "started a threshold sweep",
}

// auditObjectKinds names object types whose stored key is not the word the
// pages use: events written before migration 0010 name a sweep
// "exploration".
var auditObjectKinds = map[string]string{
	"exploration": "sweep",
}

// auditActionLabel words an action; one nobody has worded yet reads as its
// key with spaces.
func auditActionLabel(action string) string {
	if l, ok := auditActions[action]; ok {
		return l
	}
	if e, ok := strings.CutPrefix(action, "case."); ok {
		if l := followup.Edit(action).Label(); l != action {
			return l
		}
		action = "case " + e
	}
	return strings.NewReplacer(".", " ", "_", " ").Replace(action)
}

// auditObjectLabel names an event's object: a participant's by their study
// ID, their case, recording or referral by its number and the study ID.
func auditObjectLabel(e db.AuditEvent) string {
	kind := strings.ReplaceAll(e.ObjectType, "_", " ")
	if k, ok := auditObjectKinds[e.ObjectType]; ok {
		kind = k
	}
	switch {
	case e.ObjectType == "participant" && e.StudyID != "":
		return "participant " + e.StudyID
	case e.StudyID != "":
		return kind + " " + e.ObjectID + " of " + e.StudyID
	case e.ObjectID == "":
		return kind
	}
	return kind + " " + e.ObjectID
}

// auditFields words the stored field names that are not plain words.
var auditFields = map[string]string{
	"phi_fields_set":    "identifying details given",
	"purpose":           "why",
	"cases_rescheduled": "cases given a new due date",
	"first_week":        "first study week",
	"last_week":         "last study week",
	"due_at":            "due",
	"owner_id":          "owner's account",
	"closure_days":      "closure days",
	"time_zone":         "time zone",
	"follow_up_weeks":   "weeks of wear data",
}

// auditFieldLabel words a field's path: "service_levels.FirstContactWorkingDays"
// reads "service levels › first contact working days".
func auditFieldLabel(path string) string {
	if path == "" {
		return "value"
	}
	parts := strings.Split(path, ".")
	for i, p := range parts {
		if l, ok := auditFields[p]; ok {
			parts[i] = l
			continue
		}
		parts[i] = words(p)
	}
	return strings.Join(parts, " › ")
}

// words splits a snake_case or CamelCase key into lower-case words.
func words(key string) string {
	var b strings.Builder
	prev := rune(0)
	for _, r := range key {
		switch {
		case r == '_' || r == '-':
			b.WriteByte(' ')
		case unicode.IsUpper(r) && prev != 0 && prev != '_' && !unicode.IsUpper(prev):
			b.WriteByte(' ')
			b.WriteRune(unicode.ToLower(r))
		default:
			b.WriteRune(unicode.ToLower(r))
		}
		prev = r
	}
	return b.String()
}

// auditValue shows a stored value as people read it: days and moments in the
// date style (moments in the study's zone), anything else as stored. Lists
// of days are written day by day.
func auditValue(v string, loc *time.Location) string {
	if v == "" {
		return ""
	}
	if d, err := cohort.ParseDate(v); err == nil && len(v) == 10 {
		return d.Label()
	}
	if t, err := time.Parse(time.RFC3339Nano, v); err == nil {
		return when(t, loc)
	}
	if strings.Contains(v, ", ") {
		parts := strings.Split(v, ", ")
		changed := false
		for i, p := range parts {
			if d, err := cohort.ParseDate(p); err == nil && len(p) == 10 {
				parts[i], changed = d.Label(), true
			}
		}
		if changed {
			return strings.Join(parts, ", ")
		}
	}
	return v
}
