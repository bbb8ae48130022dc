package db_test

import (
	"context"
	"errors"
	"slices"
	"strings"
	"testing"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
	"cohortdesk/db"
)

func TestStudySettingsDefaultsValidationAndAudit(t *testing.T) {
	s := newStore(t)
	ctx := context.Background()
	st, err := s.StudySettings(ctx)
	if err != nil || st.Configured || st.Service != followup.DefaultServiceLevels() || st.EpisodeGapWeeks != db.DefaultEpisodeGapWeeks {
		t.Fatalf("defaults %+v %v", st, err)
	}
	bad := db.StudySettingsInput{Name: "", TimeZone: "Mars/Base", EnrolmentTarget: "-1", FirstContactWorkingDays: "two",
		MaxAttempts: "0", GiveUpAfterDays: "14", RecorderSendWithinDays: "5", RecordingBackWithinDays: "999",
		OverReadWithinDays: "7", ReferOrCloseWithinDays: "3", EpisodeGapWeeks: "0", ClosureDays: "2026-12-25\n2026-13-01"}
	_, err = s.SaveStudySettings(ctx, cohort.System, bad)
	var ve *cohort.ValidationError
	if !errors.As(err, &ve) {
		t.Fatalf("bad settings: %v", err)
	}
	for field, want := range map[string]string{
		"name": "name", "time_zone": "time zone", "enrolment_target": "target", "first_contact_working_days": "whole number",
		"max_attempts": "1 to 100", "recording_back_within_days": "0 to 366", "episode_gap_weeks": "1 to 26",
		"closure_days": "line 2",
	} {
		if !strings.Contains(ve.Fields[field], want) {
			t.Errorf("%s: message %q lacks %q", field, ve.Fields[field], want)
		}
	}
	good := bad
	good.Name, good.TimeZone, good.EnrolmentTarget, good.FirstContactWorkingDays = "Rhythm study", "Europe/Lisbon", "2400", "3"
	good.MaxAttempts, good.RecordingBackWithinDays, good.EpisodeGapWeeks = "4", "10", "3"
	good.ClosureDays = "2026-12-25, 2026-01-01\n2026-12-25"
	if _, err := s.SaveStudySettings(ctx, cohort.Actor{UserID: 0, Name: "admin test"}, good); err != nil {
		t.Fatal(err)
	}
	st, err = s.StudySettings(ctx)
	if err != nil || !st.Configured || st.Name != "Rhythm study" || st.TimeZone != "Europe/Lisbon" || st.EnrolmentTarget != 2400 ||
		st.Service.FirstContactWorkingDays != 3 || st.Service.MaxAttempts != 4 || st.EpisodeGapWeeks != 3 ||
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

// FuzzClosureDays feeds arbitrary text to the closure-days field: it never
// panics, and whatever it accepts is sorted, free of duplicates and reads back
// the same when written one date per line.
func FuzzClosureDays(f *testing.F) {
	for _, seed := range []string{"", "2026-12-25", "2026-12-25\n2026-01-01, 2026-12-25", " 2026-02-29", "2026-13-01", "1999-12-31",
		"2026-07-04;2026-07-03\r\n", "\t,,;", "2026-1-5", "20261225"} {
		f.Add(seed)
	}
	base := db.StudySettingsInput{Name: "s", TimeZone: "UTC", EnrolmentTarget: "0", FirstContactWorkingDays: "2", MaxAttempts: "5",
		GiveUpAfterDays: "14", RecorderSendWithinDays: "5", RecordingBackWithinDays: "14", OverReadWithinDays: "7",
		ReferOrCloseWithinDays: "3", EpisodeGapWeeks: "2"}
	f.Fuzz(func(t *testing.T, text string) {
		in := base
		in.ClosureDays = text
		st, err := in.Parse()
		if err != nil {
			var ve *cohort.ValidationError
			if !errors.As(err, &ve) || len(ve.Fields) != 1 || ve.Fields["closure_days"] == "" {
				t.Fatalf("%q: %v, want a message on closure_days only", text, err)
			}
			return
		}
		var lines []string
		for i, d := range st.ClosureDays {
			if i > 0 && !st.ClosureDays[i-1].Before(d) {
				t.Fatalf("%q: days not sorted and unique: %v", text, st.ClosureDays)
			}
			lines = append(lines, d.String())
		}
		in.ClosureDays = strings.Join(lines, "\n")
		again, err := in.Parse()
		if err != nil || !slices.Equal(again.ClosureDays, st.ClosureDays) {
			t.Fatalf("%q: round trip gave %v (%v), want %v", text, again.ClosureDays, err, st.ClosureDays)
		}
	})
}
