package web

import (
	"strings"
	"testing"

	"cohortdesk/cohort"
)

func TestProgressPageShowsEnrolmentProjectionAndSilence(t *testing.T) {
	a := newApp(t)
	a.exec(`INSERT INTO sites (code, name, target) VALUES ('AA', 'Site A', 10), ('BB', 'Site B', 5)`)
	// Site A: 6 enrolled over recent weeks; site B: target met. One silent participant.
	a.exec(`INSERT INTO participants (study_id, site_id, time_zone, enrolled_on)
		SELECT 'A-' || g, 1, 'UTC', current_date - (g * 9) FROM generate_series(1, 6) g`)
	a.exec(`INSERT INTO participants (study_id, site_id, time_zone, enrolled_on)
		SELECT 'B-' || g, 2, 'UTC', current_date - 100 FROM generate_series(1, 5) g`)
	res, body := a.get(a.signIn(cohort.Monitor), "/progress")
	if res.StatusCode != 200 {
		t.Fatalf("status %d", res.StatusCode)
	}
	for _, want := range []string{"AA · Site A", "target reached", "Poisson", `data-testid="chart-enrolment"`, `data-testid="silent-table"`, "A-2"} {
		if !strings.Contains(body, want) {
			t.Errorf("progress page lacks %q", want)
		}
	}
}
