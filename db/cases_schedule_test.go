package db_test

import (
	"context"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
	"cohortdesk/db"
)

func TestDueDatesCountWorkingDaysInTheStudyZone(t *testing.T) {
	for _, c := range []struct {
		name    string
		now     time.Time
		closure []cohort.Date
		want    time.Time
	}{
		{
			// 2026-07-02 is a Thursday and Chicago is on UTC-5 (CDT) in July
			// (verified: GNU date with the IANA time zone database). The flag is
			// Thursday evening in Chicago but already Friday in UTC. With Monday
			// 6 July a closure day, two working days after Thursday are Friday 3
			// and Tuesday 7 July, so the case is due by the end of Tuesday, local
			// midnight = 2026-07-08 05:00 UTC (computed by hand from the counting
			// rule of followup.Calendar.AddWorkingDays, which is ours). Counting
			// from the UTC day (Friday) would give the end of Wednesday instead.
			name: "zone and closure day", now: time.Date(2026, 7, 3, 1, 0, 0, 0, time.UTC), closure: []cohort.Date{day(2026, 7, 6)},
			want: time.Date(2026, 7, 8, 5, 0, 0, 0, time.UTC),
		},
		{
			// 2026-03-06 is a Friday and US daylight saving time starts on
			// Sunday 8 March 2026, the second Sunday of March (verified: GNU date
			// with the IANA time zone database). Flag Friday 10:00 CST; two
			// working days: Monday 9 and Tuesday 10 March, due at local midnight
			// after Tuesday, which is in CDT: 2026-03-11 05:00 UTC (computed by
			// hand, as above).
			name: "daylight saving starts", now: time.Date(2026, 3, 6, 16, 0, 0, 0, time.UTC),
			want: time.Date(2026, 3, 11, 5, 0, 0, 0, time.UTC),
		},
	} {
		t.Run(c.name, func(t *testing.T) {
			f := newCaseFixture(t, 1)
			f.clock.set(c.now)
			saveSettings(t, f.s, func(in *db.StudySettings) { in.TimeZone = "America/Chicago"; in.ClosureDays = c.closure })
			f.positive(f.proto, "P1", 3)
			f.sync()
			got := f.get(f.caseID("P1"))
			if !got.DueAt.Equal(c.want) || got.NextAction != followup.ActionFirstContact {
				t.Fatalf("due %v (%s), want %v", got.DueAt.UTC(), got.NextAction, c.want)
			}
		})
	}
}

func TestSettingsChangeReschedulesOpenCases(t *testing.T) {
	f := newCaseFixture(t, 2)
	f.positive(f.proto, "P1", 3)
	f.sync()
	id := f.caseID("P1")
	before := f.get(id).DueAt
	// fixedNow is Monday 2026-06-01 12:00 UTC (verified: GNU date): 2 working
	// days -> end of Wednesday 3 June (computed by hand from the counting rule,
	// which is ours).
	if want := time.Date(2026, 6, 4, 0, 0, 0, 0, time.UTC); !before.Equal(want) {
		t.Fatalf("due %v, want %v", before, want)
	}
	saveSettings(t, f.s, func(in *db.StudySettings) { in.Service.FirstContactWorkingDays = 4 })
	// Four working days after Monday: Tue, Wed, Thu, Fri -> end of Friday 5 June
	// (computed by hand).
	if got, want := f.get(id).DueAt, time.Date(2026, 6, 6, 0, 0, 0, 0, time.UTC); !got.Equal(want) {
		t.Fatalf("after the settings change due %v, want %v", got, want)
	}
	if f.get(id).Version != 1 {
		t.Fatal("rescheduling changed the case version")
	}
	var n int
	f.s.Pool().QueryRow(context.Background(), `SELECT (new_value->>'cases_rescheduled')::int FROM audit_events WHERE action = 'study.update' ORDER BY id DESC LIMIT 1`).Scan(&n)
	if n != 1 {
		t.Fatalf("audited %d rescheduled cases, want 1", n)
	}
}
