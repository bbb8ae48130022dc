package web

import (
	"context"
	"encoding/csv"
	"fmt"
	"html"
	"strings"
	"testing"

	"cohortdesk/cohort"
	"cohortdesk/cohort/deid"
)

// TestMonitorSeesStudyTime: where a coordinator sees dates and free text, a
// monitor sees study time in their place: the enrolment as a recruitment
// week, the withdrawal as a study day (no reason), the timeline's weeks as
// study days, a chart axis in study days, a note that notes are not shown,
// and the participants CSV with recruitment_week and withdrawn_study_day
// columns. The figures are computed here from the stored dates.
func TestMonitorSeesStudyTime(t *testing.T) {
	a := newApp(t)
	f := plantMonitorFixture(t, a)
	ctx := context.Background()
	first, err := a.store.FirstEnrolment(ctx)
	if err != nil {
		t.Fatal(err)
	}
	var pid int64
	var p struct {
		enrolled, withdrawn cohort.Date
	}
	for _, id := range f.pids {
		q, err := a.store.Participant(ctx, id)
		if err != nil {
			t.Fatal(err)
		}
		if q.WithdrawnOn != nil {
			pid, p.enrolled, p.withdrawn = id, q.EnrolledOn, *q.WithdrawnOn
		}
	}
	if pid == 0 {
		t.Fatal("no withdrawn canary")
	}
	mon, coord := a.signIn(cohort.Monitor), a.signIn(cohort.Coordinator)
	path := fmt.Sprintf("/participants/%d?week=2", pid)
	_, page := a.get(mon, path)
	text, page := stripTags(page), html.UnescapeString(page)
	for _, want := range []string{
		fmt.Sprintf("recruitment week %d", deid.RecruitmentWeek(first, p.enrolled)),
		fmt.Sprintf("study day %d", p.withdrawn.DaysSince(p.enrolled)),
		"days 14–20", "not shown to your role", `"name":"study day"`,
	} {
		if !strings.Contains(text, want) && !strings.Contains(page, want) {
			t.Errorf("the monitor's page lacks %q", want)
		}
	}
	if strings.Contains(page, "Time zone") {
		t.Error("the monitor's page shows the participant's time zone")
	}
	_, staff := a.get(coord, path)
	for _, want := range []string{p.enrolled.Label(), p.withdrawn.Label(), freeTextMarker, "Time zone"} {
		if !strings.Contains(staff, want) {
			t.Errorf("the coordinator's page lacks %q", want)
		}
	}

	_, body := a.get(mon, "/participants.csv?status=withdrawn")
	recs, err := csv.NewReader(strings.NewReader(body)).ReadAll()
	if err != nil || len(recs) < 2 {
		t.Fatalf("monitor CSV: %v, %d records", err, len(recs))
	}
	col := map[string]int{}
	for i, h := range recs[0] {
		col[h] = i
	}
	if _, ok := col["enrolled_on"]; ok {
		t.Error("the monitor's CSV has enrolment dates")
	}
	found := false
	for _, r := range recs[1:] {
		if r[col["study_id"]] == studyIDOf(f, pid) {
			found = true
			if got, want := r[col["recruitment_week"]], fmt.Sprint(deid.RecruitmentWeek(first, p.enrolled)); got != want {
				t.Errorf("recruitment_week %s, want %s", got, want)
			}
			if got, want := r[col["withdrawn_study_day"]], fmt.Sprint(p.withdrawn.DaysSince(p.enrolled)); got != want {
				t.Errorf("withdrawn_study_day %s, want %s", got, want)
			}
		}
	}
	if !found {
		t.Error("the withdrawn canary is not in the monitor's CSV")
	}
}

func studyIDOf(f monitorFixture, pid int64) string {
	for sid, id := range f.pids {
		if id == pid {
			return sid
		}
	}
	return ""
}
