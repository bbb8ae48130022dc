package web

import (
	"net/http"
	"strings"
	"testing"

	"cohortdesk/cohort"
)

func upload(t *testing.T, a *app, c *http.Client, kind, name, body string) (*http.Response, string) {
	t.Helper()
	res, page := a.postFile(c, "/imports", [][2]string{{"kind", kind}}, "file", name, []byte(body))
	if res.StatusCode != http.StatusSeeOther {
		return res, page
	}
	return a.get(c, res.Header.Get("Location"))
}

func TestUploadReadingsShowsReportAndQuarantine(t *testing.T) {
	a := newApp(t)
	a.exec(`INSERT INTO sites (code, name) VALUES ('AA', 'Site A')`)
	a.exec(`INSERT INTO participants (study_id, site_id, time_zone, enrolled_on) VALUES ('P-1', 1, 'UTC', '2026-03-02')`)
	c := a.signIn(cohort.Coordinator)
	file := "study_id,time,kind,value,end_time\n" +
		"P-1,2026-03-03T08:00:00Z,heart_rate,70,\n" +
		"P-1,2026-03-03T08:05:00Z,heart_rate,999,\n" +
		"P-7,2026-03-03T08:05:00Z,heart_rate,70,\n"
	res, body := upload(t, a, c, "readings_csv", "week.csv", file)
	if res.StatusCode != 200 {
		t.Fatalf("status %d", res.StatusCode)
	}
	for _, want := range []string{`data-testid="import-accepted">1<`, `data-testid="import-rejected">2<`, "line 3:", "line 4:", "implausible", "unknown_participant"} {
		if !strings.Contains(body, want) {
			t.Errorf("report lacks %q", want)
		}
	}
	// The refused rows download with their lines.
	res, csvBody := a.get(c, "/imports/1/rejects.csv")
	if res.StatusCode != 200 || !strings.Contains(csvBody, "3,,implausible") || !strings.Contains(csvBody, "P-7,2026-03-03T08:05:00") {
		t.Fatalf("rejects CSV: %d\n%s", res.StatusCode, csvBody)
	}
	// Sending it again changes nothing.
	_, body = upload(t, a, c, "readings_csv", "week.csv", file)
	if !strings.Contains(body, `data-testid="import-accepted">0<`) || !strings.Contains(body, "already stored") {
		t.Errorf("second upload report does not say nothing changed")
	}
	// A monitor may not import.
	m := a.signIn(cohort.Monitor)
	if res, _ := upload(t, a, m, "readings_csv", "week.csv", file); res.StatusCode != http.StatusForbidden {
		t.Fatalf("monitor upload: status %d", res.StatusCode)
	}
}

func TestUploadRefusedFileSaysWhatAndWhere(t *testing.T) {
	a := newApp(t)
	c := a.signIn(cohort.Coordinator)
	_, body := upload(t, a, c, "readings_csv", "odd.csv", "study_id,when,kind,value\nP-1,x,heart_rate,1\n")
	if !strings.Contains(body, `data-testid="import-status">failed<`) || !strings.Contains(body, "when") {
		t.Fatalf("refused file report:\n%s", body)
	}
}
