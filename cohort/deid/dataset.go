package deid

import (
	"fmt"
	"slices"
	"strconv"
	"strings"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/overread"
)

// Column describes one column of a dataset file for the data dictionary.
type Column struct {
	Name        string // the CSV header, also the allow-list entry
	Type        string // text, integer, number or yes/no
	Description string // what the value is and which rule made it
}

// Table is one CSV file of the de-identified dataset export.
type Table struct {
	Export  Export   // the allow-list the file's header is checked against
	File    string   // file name inside the export
	About   string   // one line: what a row is
	Columns []Column // in the order the file has them
}

// The dataset export's files, each with its own allow-list.
const (
	// DatasetParticipants is one row per participant.
	DatasetParticipants Export = "dataset-participants"
	// DatasetWeeks is one row per participant-week with stored wear data.
	DatasetWeeks Export = "dataset-participant-weeks"
	// DatasetWindows is one row per screening result and window size.
	DatasetWindows Export = "dataset-screen-windows"
	// DatasetCases is one row per follow-up case, without any free text.
	DatasetCases Export = "dataset-cases"
	// DatasetOverReads is one row per over-read, without comments or readers.
	DatasetOverReads Export = "dataset-over-reads"
)

const (
	codeDesc     = "pseudonymous referral code: a keyed hash of the study ID (identifier 18 replaced), the same in every file"
	studyDayDesc = "days from the participant's enrolment day (day 0) in the participant's time zone; dates are not exported (identifier 3)"
	answerDesc   = "intake answer: yes, no, or empty when not answered"
)

// datasetTables is the export's data dictionary and, through it, the
// allow-lists of its files. A column exists in an export only if it is
// described here, where the privacy review reads it.
var datasetTables = []Table{
	{DatasetParticipants, "participants.csv", "one row per enrolled participant", []Column{
		{"referral_code", "text", codeDesc},
		{"site_code", "text", "the site's short code (no site name or place)"},
		{"sex", "text", "F, M or U (not recorded)"},
		{"age_at_enrolment", "text", "whole years at enrolment; ages over 89 are \"90 or older\" (identifier 3)"},
		{"age_band", "text", "age band at enrolment (<50, 50-54, 55-59, ... 85-89, 90 or older)"},
		{"zip3", "text", "first three ZIP digits, 000 for the 17 prefixes of under 20,000 people in HHS's 2012 guidance; empty when not recorded (identifier 2)"},
		{"withdrawn_study_day", "integer", "study day of withdrawal, empty while enrolled; " + studyDayDesc},
		{"rr_capable", "yes/no", "the participant's watch records beat-to-beat intervals"},
		{"hypertension", "yes/no", answerDesc},
		{"diabetes", "yes/no", answerDesc},
		{"heart_failure", "yes/no", answerDesc},
		{"prior_stroke", "yes/no", answerDesc + " (stroke, TIA or thromboembolism)"},
		{"vascular_disease", "yes/no", answerDesc},
	}},
	{DatasetWeeks, "participant_weeks.csv", "one row per participant-week with stored wear data", []Column{
		{"referral_code", "text", codeDesc},
		{"study_week", "integer", "study week N covers study days 7N to 7N+6"},
		{"hr_readings", "integer", "heart-rate readings stored for the week"},
		{"step_readings", "integer", "step-count intervals stored for the week"},
		{"rr_intervals", "integer", "beat-to-beat intervals stored for the week"},
	}},
	{ScreeningResults, "screen_results.csv", "one row per screened participant-week and protocol version", []Column{
		{"referral_code", "text", codeDesc},
		{"study_week", "integer", "study week N covers study days 7N to 7N+6"},
		{"protocol_id", "integer", "the screening protocol version's number in this deployment"},
		{"protocol_version", "integer", "the version number of that protocol"},
		{"verdict", "text", "positive, negative or insufficient (a screen, not a diagnosis)"},
		{"wear_hours", "number", "usable wear of the week in hours"},
		{"max_irregular_share", "number", "largest share of irregular windows over the window sizes, 0-1"},
		{"rr_segments", "integer", "beat-interval segments scored, empty when the method did not run"},
		{"rr_af_like", "integer", "of those, segments meeting all three AF-like criteria"},
	}},
	{DatasetWindows, "screen_windows.csv", "one row per screened participant-week, protocol version and window size", []Column{
		{"referral_code", "text", codeDesc},
		{"study_week", "integer", "study week N covers study days 7N to 7N+6"},
		{"protocol_id", "integer", "as in screen_results.csv"},
		{"window_minutes", "integer", "window size in minutes"},
		{"usable_windows", "integer", "windows that passed the reading, gap and step tests"},
		{"irregular_windows", "integer", "usable windows at or above the MASD threshold"},
		{"irregular_share", "number", "irregular / usable windows, 0-1"},
		{"longest_run", "integer", "longest run of consecutive irregular windows"},
		{"mean_masd", "number", "mean of the usable windows' mean absolute successive difference, bpm"},
	}},
	{DatasetCases, "cases.csv", "one row per follow-up case; notes, reasons, owners and tracking numbers are not exported", []Column{
		{"referral_code", "text", codeDesc},
		{"case_number", "integer", "the participant's cases numbered 1, 2, ... by first flagged week"},
		{"protocol_id", "integer", "the protocol version whose results opened the case"},
		{"first_study_week", "integer", "first screen-positive study week of the episode"},
		{"last_study_week", "integer", "last screen-positive study week of the episode"},
		{"case_state", "text", "the case's state (stored value, e.g. over_read, referred, closed_unreachable)"},
		{"flagged_study_day", "integer", "study day the case was opened; " + studyDayDesc},
		{"reached_study_day", "integer", "study day the participant was reached, empty if never"},
		{"recorder_sent_study_day", "integer", "study day the recorder was sent, empty if never"},
		{"recording_back_study_day", "integer", "study day the recording came back, empty if never"},
		{"over_read_study_day", "integer", "study day of the first interpretable over-read, empty if none"},
		{"closed_study_day", "integer", "study day the case ended, empty while open"},
		{"contact_attempts", "integer", "number of contact attempts logged (their notes stay inside)"},
	}},
	{DatasetOverReads, "over_reads.csv", "one row per over-read of an ECG recording; comments and readers are not exported", []Column{
		{"referral_code", "text", codeDesc},
		{"case_number", "integer", "as in cases.csv"},
		{"recording_number", "integer", "the case's recordings numbered 1, 2, ... by time taken"},
		{"recording_study_day", "integer", "study day the recording was taken; " + studyDayDesc},
		{"recording_duration_s", "number", "recording length in seconds"},
		{"auto_interpretation", "text", autoDesc()},
		{"reader_role", "text", "first, second or adjudication"},
		{"rhythm", "text", "af, flutter, sinus, other or uninterpretable"},
		{"confidence", "text", "certain, probable or uncertain"},
		{"read_study_day", "integer", "study day of the read; " + studyDayDesc},
	}},
}

// autoDesc lists the recorder's readings with their stored values, from
// overread's labels.
func autoDesc() string {
	var parts []string
	for _, a := range overread.Autos() {
		parts = append(parts, fmt.Sprintf("%s (%s)", a, a.Label()))
	}
	return "the recorder's own reading, the device's call and not a diagnosis: " + strings.Join(parts, ", ")
}

// DatasetTables returns the dataset export's files in the order the export
// writes them, as a deep copy.
func DatasetTables() []Table {
	out := make([]Table, len(datasetTables))
	for i, t := range datasetTables {
		out[i] = t
		out[i].Columns = slices.Clone(t.Columns)
	}
	return out
}

// Header returns the column names of a table, the header its file must have.
func (t Table) Header() []string {
	h := make([]string, len(t.Columns))
	for i, c := range t.Columns {
		h[i] = c.Name
	}
	return h
}

func init() {
	for _, t := range datasetTables {
		allowList[t.Export] = t.Header()
	}
}

// Records as the store reads them. They still hold identifiers (study IDs,
// ZIP codes, dates); a Dataset turns each into a de-identified CSV row.

// ParticipantRecord is one participant as read for the export.
type ParticipantRecord struct {
	StudyID        string
	SiteCode       string
	Sex            cohort.Sex
	AgeAtEnrolment *int // nil when not recorded
	ZIP            string
	EnrolledOn     cohort.Date
	WithdrawnOn    *cohort.Date
	RRCapable      bool
	// Intake answers; nil when not answered.
	Hypertension, Diabetes, HeartFailure, PriorStroke, VascularDisease *bool
}

// WeekRecord is one stored participant-week.
type WeekRecord struct {
	StudyID       string
	Week          int
	HR, Steps, RR int64 // stored readings of each kind
}

// WindowRecord is one window size of a screening result.
type WindowRecord struct {
	Minutes, Usable, Irregular, LongestRun int
	Share, MeanMASD                        float64
}

// ScreenRecord is one screening result.
type ScreenRecord struct {
	StudyID         string
	Week            int
	ProtocolID      int
	ProtocolVersion int
	Verdict         string
	WearHours       float64
	Windows         []WindowRecord
	RRRan           bool // the beat-interval method scored this week
	RRSegments      int
	RRAFLike        int
}

// CaseRecord is one follow-up case. Zero times are unset.
type CaseRecord struct {
	StudyID                                                                     string
	EnrolledOn                                                                  cohort.Date
	Location                                                                    *time.Location // the participant's time zone
	Number                                                                      int            // 1, 2, ... within the participant
	ProtocolID                                                                  int
	FirstWeek                                                                   int
	LastWeek                                                                    int
	State                                                                       string
	FlaggedAt, ReachedAt, RecorderSentAt, RecordingBackAt, OverReadAt, ClosedAt time.Time
	Attempts                                                                    int
}

// OverReadRecord is one over-read with its recording.
type OverReadRecord struct {
	StudyID            string
	EnrolledOn         cohort.Date
	Location           *time.Location
	CaseNumber         int
	RecordingNumber    int
	TakenAt            time.Time
	DurationS          float64
	AutoInterpretation string
	Role               string
	Rhythm             string
	Confidence         string
	ReadOn             cohort.Date
}

// Dataset applies the export rules: pseudonymous codes for study IDs, study
// days for dates, folded ages, three-digit ZIPs. Each method returns a row in
// its table's column order.
type Dataset struct {
	secret []byte
	codes  map[string]string
}

// NewDataset checks the deployment secret and prepares the rules.
func NewDataset(secret []byte) (*Dataset, error) {
	if err := CheckSecret(secret); err != nil {
		return nil, err
	}
	return &Dataset{secret: secret, codes: map[string]string{}}, nil
}

// Code is the referral code of a study ID, computed once per participant.
func (d *Dataset) Code(studyID string) string {
	c, ok := d.codes[studyID]
	if !ok {
		c = Code(d.secret, studyID)
		d.codes[studyID] = c
	}
	return c
}

// Participant is the row of participants.csv.
func (d *Dataset) Participant(r ParticipantRecord) []string {
	age, band := "", ""
	if r.AgeAtEnrolment != nil {
		age, band = FoldAge(*r.AgeAtEnrolment).String(), AgeBand(*r.AgeAtEnrolment)
	}
	zip := ""
	if r.ZIP != "" {
		zip, _ = ZIP3(r.ZIP) // a malformed ZIP gives the safe 000
	}
	withdrawn := ""
	if r.WithdrawnOn != nil {
		withdrawn = strconv.Itoa(StudyTimeOf(r.EnrolledOn, *r.WithdrawnOn).Day)
	}
	return []string{d.Code(r.StudyID), r.SiteCode, sexCode(r.Sex), age, band, zip, withdrawn, yesNo(r.RRCapable),
		answer(r.Hypertension), answer(r.Diabetes), answer(r.HeartFailure), answer(r.PriorStroke), answer(r.VascularDisease)}
}

// Week is the row of participant_weeks.csv.
func (d *Dataset) Week(r WeekRecord) []string {
	return []string{d.Code(r.StudyID), strconv.Itoa(r.Week), i64(r.HR), i64(r.Steps), i64(r.RR)}
}

// Screen is the row of screen_results.csv.
func (d *Dataset) Screen(r ScreenRecord) []string {
	share := 0.0
	for _, w := range r.Windows {
		share = max(share, w.Share)
	}
	segs, af := "", ""
	if r.RRRan {
		segs, af = strconv.Itoa(r.RRSegments), strconv.Itoa(r.RRAFLike)
	}
	return []string{d.Code(r.StudyID), strconv.Itoa(r.Week), strconv.Itoa(r.ProtocolID), strconv.Itoa(r.ProtocolVersion),
		r.Verdict, num(r.WearHours, 1), num(share, 4), segs, af}
}

// Windows are the rows of screen_windows.csv for one result.
func (d *Dataset) Windows(r ScreenRecord) [][]string {
	out := make([][]string, 0, len(r.Windows))
	for _, w := range r.Windows {
		out = append(out, []string{d.Code(r.StudyID), strconv.Itoa(r.Week), strconv.Itoa(r.ProtocolID), strconv.Itoa(w.Minutes),
			strconv.Itoa(w.Usable), strconv.Itoa(w.Irregular), num(w.Share, 4), strconv.Itoa(w.LongestRun), num(w.MeanMASD, 2)})
	}
	return out
}

// Case is the row of cases.csv.
func (d *Dataset) Case(r CaseRecord) []string {
	day := func(t time.Time) string {
		if t.IsZero() {
			return ""
		}
		return strconv.Itoa(StudyTimeAt(r.EnrolledOn, loc(r.Location), t).Day)
	}
	return []string{d.Code(r.StudyID), strconv.Itoa(r.Number), strconv.Itoa(r.ProtocolID), strconv.Itoa(r.FirstWeek), strconv.Itoa(r.LastWeek),
		r.State, day(r.FlaggedAt), day(r.ReachedAt), day(r.RecorderSentAt), day(r.RecordingBackAt), day(r.OverReadAt), day(r.ClosedAt),
		strconv.Itoa(r.Attempts)}
}

// OverRead is the row of over_reads.csv.
func (d *Dataset) OverRead(r OverReadRecord) []string {
	return []string{d.Code(r.StudyID), strconv.Itoa(r.CaseNumber), strconv.Itoa(r.RecordingNumber),
		strconv.Itoa(StudyTimeAt(r.EnrolledOn, loc(r.Location), r.TakenAt).Day), num(r.DurationS, 1), r.AutoInterpretation,
		r.Role, r.Rhythm, r.Confidence, strconv.Itoa(StudyTimeOf(r.EnrolledOn, r.ReadOn).Day)}
}

func loc(l *time.Location) *time.Location {
	if l == nil {
		return time.UTC
	}
	return l
}

func sexCode(s cohort.Sex) string {
	if s == cohort.Female || s == cohort.Male {
		return string(s)
	}
	return string(cohort.Unknown)
}

func yesNo(b bool) string {
	if b {
		return "yes"
	}
	return "no"
}

func answer(b *bool) string {
	if b == nil {
		return ""
	}
	return yesNo(*b)
}

func i64(n int64) string { return strconv.FormatInt(n, 10) }

func num(x float64, decimals int) string { return strconv.FormatFloat(x, 'f', decimals, 64) }
