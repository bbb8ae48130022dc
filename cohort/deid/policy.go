package deid

import (
	"fmt"
	"slices"
)

// Export names a kind of document or file that leaves cohortdesk.
type Export string

// The exports the tool produces. Each has its own allow-list below.
const (
	// ReferralSummary is the document for the participant's physician.
	ReferralSummary Export = "referral-summary"
	// MonitorCases is the case-handling listing of the read-only monitor view.
	MonitorCases Export = "monitor-cases"
	// ScreeningResults is the dataset export's file of per participant-week
	// screening results.
	ScreeningResults Export = "dataset-screen-results"
)

// allowList holds, per export, every column that may leave the system. A
// handler that adds a column must add it here too, where review sees it. The
// dataset export's files add theirs from their data dictionary (dataset.go).
// Free text typed by staff (notes, contact log entries, closing reasons,
// over-read comments) is on no list: it can hold anything, so it never
// leaves. Sites appear as an opaque site code, never a name or place: a
// site's location is a geographic unit smaller than a state. Digests of a
// participant's input data stay inside too; a digest is a unique code of its
// own.
var allowList = map[Export][]string{
	// The top-level fields of a referral summary's content (cohort/referral
	// Summary as JSON), in the order the document shows them.
	ReferralSummary: {
		"format_version", "referral_code", "issued_study_day", "protocol",
		"age_band", "sex", "flagged_weeks", "heart_rate", "recording",
		"over_read", "risk", "contact_route", "cautions",
		// Whether it waits for sign-off, and who signed it off on which study
		// day: the signer is study staff, not the participant.
		"draft", "sign_off",
	},
	MonitorCases: {
		"referral_code", "site_code", "age_band", "sex",
		"flag_study_week", "case_state", "state_study_day", "overdue",
		"contact_attempts", "over_read_rhythm",
	},
}

// neverAllowed lists columns that hold identifiers or free text. No
// allow-list may name them; a test holds the two lists apart.
var neverAllowed = []string{
	"name", "first_name", "last_name", "email", "phone", "fax", "address",
	"street", "city", "county", "zip", "birth_date", "enrolment_date",
	"withdrawal_date", "study_id", "participant_id", "device_serial",
	"recorder_serial", "ip_address", "notes", "note", "contact_log",
	"withdrawal_reason", "free_text", "waveform", "site_name", "input_digest",
	"comment", "closing_note", "tracking_number", "reader", "owner", "case_id",
	"recording_id", "file_name", "taken_at", "read_on", "enrolled_on",
}

// CheckFields returns an error wrapping ErrNotAllowed naming the first column
// of an export that is not on its allow-list. Exporters call it with their
// header before writing a row, so a column added by accident fails loudly.
func CheckFields(e Export, columns []string) error {
	allowed, ok := allowList[e]
	if !ok {
		return fmt.Errorf("deid: export %q is unknown: %w", e, ErrInvalid)
	}
	for i, c := range columns {
		if !slices.Contains(allowed, c) {
			return fmt.Errorf("deid: export %s: column %d %q: %w", e, i+1, c, ErrNotAllowed)
		}
	}
	return nil
}
