package followup

import (
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"
)

func TestStudySettingsValidate(t *testing.T) {
	good := DefaultStudySettings()
	good.Name = "Rhythm study"
	if err := good.Validate(); err != nil {
		t.Fatalf("defaults with a name: %v", err)
	}
	bad := good
	bad.Name, bad.TimeZone, bad.EnrolmentTarget, bad.FollowUpWeeks = "", "Mars/Base", -1, 521
	bad.ContactRoute = strings.Repeat("c", 501)
	bad.Service.MaxAttempts, bad.Service.RecordingBackWithinDays = 0, 999
	bad.EpisodeGapWeeks = 0
	bad.ClosureDays = []cohort.Date{{Year: 2026, Month: 12, Day: 25}, {Year: 1999, Month: 12, Day: 31}}
	got := fields(t, bad.Validate())
	for field, want := range map[string]string{
		"name": "name", "time_zone": "time zone", "contact_route": "500", "enrolment_target": "target",
		"follow_up_weeks": "520 weeks", "max_attempts": "1 to 100", "recording_back_within_days": "0 to 366",
		"episode_gap_weeks": "1 to 26", "closure_days": "1999-12-31 is not a date between 2000 and 2100",
	} {
		if !strings.Contains(got[field], want) {
			t.Errorf("%s: message %q lacks %q", field, got[field], want)
		}
	}
	if len(got) != 9 {
		t.Errorf("messages %v, want 9", got)
	}
	for _, name := range []string{"", "Local", "local", "Nowhere/City"} {
		if CheckTimeZone(name) == nil {
			t.Errorf("time zone %q accepted", name)
		}
	}
	many := good
	for d := (cohort.Date{Year: 2026, Month: 1, Day: 1}); len(many.ClosureDays) <= MaxClosureDays; d = d.AddDays(1) {
		many.ClosureDays = append(many.ClosureDays, d)
	}
	if msg := fields(t, many.Validate())["closure_days"]; msg != "1001 dates: at most 1000 closure days" {
		t.Errorf("too many closure days: %q", msg)
	}
}

func TestStudySettingsCalendar(t *testing.T) {
	st := DefaultStudySettings()
	st.TimeZone = "America/Chicago"
	st.ClosureDays = []cohort.Date{{Year: 2026, Month: 7, Day: 6}}
	if st.Location().String() != "America/Chicago" {
		t.Fatalf("location %v", st.Location())
	}
	// Monday 6 July 2026 is closed (verified weekday: GNU date), the weekend
	// before it too.
	if st.Calendar().IsWorkingDay(cohort.Date{Year: 2026, Month: 7, Day: 6}) || !st.Calendar().IsWorkingDay(cohort.Date{Year: 2026, Month: 7, Day: 7}) {
		t.Error("the closure day is not in the calendar")
	}
	st.TimeZone = "Nowhere/City"
	if st.Location() != time.UTC {
		t.Errorf("an unreadable zone gives %v, want UTC", st.Location())
	}
}
