package deid

import (
	"slices"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/overread"
)

func col(t *testing.T, e Export, row []string, name string) string {
	t.Helper()
	for _, tb := range DatasetTables() {
		if tb.Export != e {
			continue
		}
		i := slices.Index(tb.Header(), name)
		if i < 0 {
			t.Fatalf("%s has no column %s", e, name)
		}
		if len(row) != len(tb.Columns) {
			t.Fatalf("%s row has %d values for %d columns", e, len(row), len(tb.Columns))
		}
		return row[i]
	}
	t.Fatalf("no table %s", e)
	return ""
}

// Every dataset file's header is its allow-list, every column is described,
// and none is an identifier or free text.
func TestDatasetTablesAreTheirAllowLists(t *testing.T) {
	never := neverAllowed
	files := map[string]bool{}
	for _, tb := range DatasetTables() {
		if files[tb.File] || !strings.HasSuffix(tb.File, ".csv") {
			t.Errorf("file name %q repeated or not .csv", tb.File)
		}
		files[tb.File] = true
		if err := CheckFields(tb.Export, tb.Header()); err != nil {
			t.Errorf("%s: %v", tb.Export, err)
		}
		if tb.Header()[0] != "referral_code" {
			t.Errorf("%s: first column %q, want referral_code", tb.Export, tb.Header()[0])
		}
		for _, c := range tb.Columns {
			if c.Description == "" || c.Type == "" {
				t.Errorf("%s.%s: undescribed", tb.File, c.Name)
			}
			if slices.Contains(never, c.Name) {
				t.Errorf("%s.%s is never allowed", tb.File, c.Name)
			}
		}
	}
	if err := CheckFields(DatasetCases, []string{"referral_code", "closing_note"}); err == nil {
		t.Error("a free-text column passed the cases allow-list")
	}
	tbs := DatasetTables()
	tbs[0].Columns[0].Name = "study_id"
	if DatasetTables()[0].Columns[0].Name != "referral_code" {
		t.Error("DatasetTables must return a deep copy")
	}
}

// Ages 89, 90 and 91 at enrolment around the Safe Harbor boundary (45 CFR
// 164.514(b)(2)(i)(C); verified): 89 stays, 90 and 91 become "90 or older".
// ZIP codes with the HHS 2012 restricted prefixes become 000 (verified,
// secondary; check-values.md).
func TestDatasetParticipantRow(t *testing.T) {
	d, err := NewDataset(testSecret)
	if err != nil {
		t.Fatal(err)
	}
	enrolled := cohort.Date{Year: 2025, Month: 3, Day: 1}
	withdrawn := enrolled.AddDays(40)
	yes := true
	for _, tt := range []struct {
		age            int
		zip            string
		wantAge, wantB string
		wantZIP        string
	}{
		{89, "47913", "89", "85-89", "479"},
		{90, "89019", "90 or older", "90 or older", "000"},
		{91, "03601", "90 or older", "90 or older", "000"},
		{64, "", "64", "60-64", ""},
		{47, "not-a-zip", "47", "<50", "000"},
	} {
		age := tt.age
		row := d.Participant(ParticipantRecord{StudyID: "CN-0001", SiteCode: "NH", Sex: cohort.Female, AgeAtEnrolment: &age,
			ZIP: tt.zip, EnrolledOn: enrolled, WithdrawnOn: &withdrawn, Hypertension: &yes})
		if got := col(t, DatasetParticipants, row, "age_at_enrolment"); got != tt.wantAge {
			t.Errorf("age %d exported as %q, want %q", tt.age, got, tt.wantAge)
		}
		if got := col(t, DatasetParticipants, row, "age_band"); got != tt.wantB {
			t.Errorf("age %d band %q, want %q", tt.age, got, tt.wantB)
		}
		if got := col(t, DatasetParticipants, row, "zip3"); got != tt.wantZIP {
			t.Errorf("zip %q exported as %q, want %q", tt.zip, got, tt.wantZIP)
		}
		if got := col(t, DatasetParticipants, row, "withdrawn_study_day"); got != "40" {
			t.Errorf("withdrawal 40 days after enrolment exported as study day %q", got)
		}
		if got := col(t, DatasetParticipants, row, "referral_code"); got != Code(testSecret, "CN-0001") || strings.Contains(strings.Join(row, ","), "CN-0001") {
			t.Errorf("participant row %v does not replace the study ID by its code", row)
		}
		if got := col(t, DatasetParticipants, row, "hypertension") + col(t, DatasetParticipants, row, "diabetes"); got != "yes" {
			t.Errorf("answers yes and unanswered exported as %q", got)
		}
	}
}

// Dates become study days counted in the participant's time zone: a case
// flagged late in the evening of day 9 in its zone is day 9, though it is
// day 10 in UTC.
func TestDatasetCaseAndOverReadDays(t *testing.T) {
	d, _ := NewDataset(testSecret)
	ny, err := time.LoadLocation("America/New_York")
	if err != nil {
		t.Fatal(err)
	}
	enrolled := cohort.Date{Year: 2025, Month: 6, Day: 2}
	flagged := time.Date(2025, 6, 11, 22, 30, 0, 0, ny)
	row := d.Case(CaseRecord{StudyID: "X-1", EnrolledOn: enrolled, Location: ny, Number: 2, ProtocolID: 1, FirstWeek: 1, LastWeek: 1,
		State: "over_read", FlaggedAt: flagged, OverReadAt: flagged.Add(72 * time.Hour), Attempts: 3})
	for name, want := range map[string]string{"flagged_study_day": "9", "over_read_study_day": "12", "reached_study_day": "", "closed_study_day": "", "case_number": "2", "contact_attempts": "3"} {
		if got := col(t, DatasetCases, row, name); got != want {
			t.Errorf("%s = %q, want %q", name, got, want)
		}
	}
	or := d.OverRead(OverReadRecord{StudyID: "X-1", EnrolledOn: enrolled, Location: ny, CaseNumber: 2, RecordingNumber: 1,
		TakenAt: flagged.Add(48 * time.Hour), DurationS: 30, AutoInterpretation: string(overread.AutoSuggestsAF), Role: "first", Rhythm: "af", Confidence: "certain",
		ReadOn: enrolled.AddDays(13)})
	if got := col(t, DatasetOverReads, or, "read_study_day"); got != "13" {
		t.Errorf("read on day 13 exported as %q", got)
	}
	if got := col(t, DatasetOverReads, or, "recording_study_day"); got != "11" {
		t.Errorf("recording of day 11 exported as %q", got)
	}
}

func TestNewDatasetRefusesShortSecret(t *testing.T) {
	_, err := NewDataset([]byte("short"))
	wantInvalid(t, "short secret", err)
}

func TestFoldAge(t *testing.T) {
	// 45 CFR 164.514(b)(2)(i)(C) (verified): ages over 89 are one category.
	for _, tt := range []struct {
		in   int
		want string
	}{{0, "0"}, {89, "89"}, {90, "90 or older"}, {91, "90 or older"}, {130, "90 or older"}} {
		if got := FoldAge(tt.in); got.String() != tt.want || got.BirthYearOK {
			t.Errorf("FoldAge(%d) = %+v, want %q without a birth year", tt.in, got, tt.want)
		}
	}
}

// The data dictionary describes the recorder's own reading in the words of
// the app (overread's labels, each with its stored value) and says it is
// the device's call; none of the retired stored values is listed.
func TestDatasetDictionaryWordsTheRecordersReading(t *testing.T) {
	var desc string
	for _, tb := range DatasetTables() {
		for _, c := range tb.Columns {
			if c.Name == "auto_interpretation" {
				desc = c.Description
			}
		}
	}
	if desc == "" {
		t.Fatal("no table describes auto_interpretation")
	}
	for _, a := range overread.Autos() {
		if want := string(a) + " (" + a.Label() + ")"; !strings.Contains(desc, want) {
			t.Errorf("the dictionary lacks %q: %s", want, desc)
		}
	}
	if !strings.Contains(desc, "not a diagnosis") {
		t.Errorf("the dictionary does not say the reading is the device's call: %s", desc)
	}
	// The stored values before migration 0070.
	for _, old := range []string{"af (", "sinus (", "unclassified (", "unreadable (", "none ("} {
		if strings.Contains(desc, " "+old) || strings.HasPrefix(desc, old) {
			t.Errorf("the dictionary still lists the retired value %q: %s", old, desc)
		}
	}
}
