package db_test

import (
	"context"
	"errors"
	"testing"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
)

// The rules of the settings are followup.StudySettings.Validate's (tested
// there) and reading the form is web's; the store refuses what the rules
// refuse, stores and audits the rest.
func TestStudySettingsDefaultsValidationAndAudit(t *testing.T) {
	s := newStore(t)
	ctx := context.Background()
	st, err := s.StudySettings(ctx)
	if err != nil || st.Configured || st.Service != followup.DefaultServiceLevels() || st.EpisodeGapWeeks != followup.DefaultEpisodeGapWeeks {
		t.Fatalf("defaults %+v %v", st, err)
	}
	bad := followup.DefaultStudySettings()
	bad.TimeZone, bad.EnrolmentTarget, bad.Service.MaxAttempts, bad.EpisodeGapWeeks = "Mars/Base", -1, 0, 0
	_, _, err = s.SaveStudySettings(ctx, cohort.System, bad)
	var ve *cohort.ValidationError
	if !errors.As(err, &ve) {
		t.Fatalf("bad settings: %v", err)
	}
	for _, field := range []string{"name", "time_zone", "enrolment_target", "max_attempts", "episode_gap_weeks"} {
		if ve.Fields[field] == "" {
			t.Errorf("%s: no message (%v)", field, ve.Fields)
		}
	}
	if st, _ := s.StudySettings(ctx); st.Configured {
		t.Fatal("refused settings were stored")
	}
	good := followup.DefaultStudySettings()
	good.Name, good.TimeZone, good.EnrolmentTarget = "Rhythm study", "Europe/Lisbon", 2400
	good.Service.FirstContactWorkingDays, good.Service.MaxAttempts, good.Service.RecordingBackWithinDays, good.EpisodeGapWeeks = 3, 4, 10, 3
	good.ClosureDays = []cohort.Date{{Year: 2026, Month: 1, Day: 1}, {Year: 2026, Month: 12, Day: 25}}
	if _, _, err := s.SaveStudySettings(ctx, cohort.Actor{UserID: 0, Name: "admin test"}, good); err != nil {
		t.Fatal(err)
	}
	st, err = s.StudySettings(ctx)
	if err != nil || !st.Configured || st.Name != "Rhythm study" || st.TimeZone != "Europe/Lisbon" || st.EnrolmentTarget != 2400 ||
		st.Service.FirstContactWorkingDays != 3 || st.Service.MaxAttempts != 4 || st.Service.RecordingBackWithinDays != 10 || st.EpisodeGapWeeks != 3 ||
		len(st.ClosureDays) != 2 || st.ClosureDays[0].String() != "2026-01-01" {
		t.Fatalf("stored %+v %v", st, err)
	}
	if name, _ := s.StudyName(ctx); name != "Rhythm study" {
		t.Fatalf("study name %q", name)
	}
	var n int
	s.Pool().QueryRow(ctx, `SELECT count(*) FROM audit_events WHERE action = 'study.update' AND new_value->>'time_zone' = 'Europe/Lisbon'`).Scan(&n)
	if n != 1 {
		t.Fatalf("settings audit events %d, want 1", n)
	}
}
