package web

import (
	"context"
	"net/http"
	"net/url"
	"regexp"
	"strconv"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/db"
	"cohortdesk/db/dbtest"
)

// withProtocol installs the default protocol, as start-up does.
func (a *app) withProtocol() db.ProtocolVersion {
	a.t.Helper()
	p, err := a.store.EnsureDefaultProtocol(context.Background())
	if err != nil {
		a.t.Fatal(err)
	}
	return p
}

var enrolDay = cohort.Date{Year: 2026, Month: 3, Day: 2}

// screenedParticipant enrols a participant with a steady week 0 and an
// irregular week 1 and screens them with the active protocol.
func (a *app) screenedParticipant(studyID string) int64 {
	a.t.Helper()
	pool := a.store.Pool()
	pid := dbtest.AddParticipant(a.t, pool, studyID, enrolDay)
	for wk, r := range []dbtest.Rhythm{dbtest.Steady, dbtest.Irregular} {
		hr := dbtest.SynthHR(uint64(pid*10+int64(wk)), r, dbtest.WeekStart(enrolDay, wk), 48, 10*time.Second)
		dbtest.PutWearWeek(a.t, pool, pid, wk, cohort.HeartRate, hr)
	}
	if _, err := db.NewScreener(a.store, nil).ScreenNow(context.Background(), []int64{pid}, 0, nil); err != nil {
		a.t.Fatal(err)
	}
	return pid
}

func TestProtocolAdministration(t *testing.T) {
	a := newApp(t)
	v1 := a.withProtocol()
	c := a.signIn(cohort.Admin)
	v1Path := "/admin/protocols/" + strconv.Itoa(v1.ID)

	res, body := a.get(c, "/admin/protocols")
	if res.StatusCode != 200 || !strings.Contains(body, "standard v1") || !strings.Contains(body, `data-testid="illustrative"`) {
		t.Fatalf("list: status %d", res.StatusCode)
	}
	res, body = a.get(c, "/admin")
	if !strings.Contains(body, `href="/admin/protocols"`) {
		t.Fatal("the administration page does not link the protocols")
	}
	res, body = a.get(c, v1Path)
	if res.StatusCode != 200 || !strings.Contains(body, "windows[0].masd_threshold") || !strings.Contains(body, `data-testid="protocol-json"`) || !strings.Contains(body, "not been clinically validated") {
		t.Fatalf("version page: status %d", res.StatusCode)
	}
	res, body = a.get(c, v1Path+"/new")
	if res.StatusCode != 200 || !strings.Contains(body, `name="p.windows[1].run_length"`) || !strings.Contains(body, `name="params"`) {
		t.Fatalf("new-version form: status %d", res.StatusCode)
	}

	form := func(edits map[string]string) url.Values {
		v := url.Values{"base_id": {strconv.Itoa(v1.ID)}, "mode": {"fields"}, "note": {"raise the 5-minute threshold"}}
		for _, l := range v1.Params.Params() {
			v.Set("p."+l.Path, l.Value)
		}
		for k, x := range edits {
			v.Set(k, x)
		}
		return v
	}
	for _, c2 := range []struct {
		name  string
		edits map[string]string
		field string
		words string
	}{
		{"negative threshold", map[string]string{"p.windows[0].masd_threshold": "-2"}, "windows[0].masd_threshold", ""},
		{"not a number", map[string]string{"p.min_wear_hours": "a day"}, "min_wear_hours", "enter a number"},
		{"fraction for an integer", map[string]string{"p.windows[1].run_length": "2.5"}, "windows[1].run_length", "whole number"},
		{"no note", map[string]string{"note": " ", "p.min_wear_hours": "30"}, "note", ""},
		{"nothing changed", nil, "form", "nothing differs"},
	} {
		res, body := a.postFormBody(c, "/admin/protocols", form(c2.edits))
		if res.StatusCode != http.StatusUnprocessableEntity || !strings.Contains(body, `data-testid="error-`+c2.field+`"`) || !strings.Contains(body, c2.words) {
			t.Errorf("%s: status %d, want 422 with a message beside %s", c2.name, res.StatusCode, c2.field)
		}
	}
	res = a.postForm(c, "/admin/protocols", form(map[string]string{"p.windows[0].masd_threshold": "9.5"}))
	if res.StatusCode != http.StatusSeeOther {
		t.Fatalf("create: status %d", res.StatusCode)
	}
	v2Path := strings.TrimSuffix(res.Header.Get("Location"), "?flash=created")
	res, body = a.get(c, v2Path)
	if res.StatusCode != 200 || !strings.Contains(body, "standard v2") || !strings.Contains(body, `data-testid="protocol-diff"`) ||
		!regexp.MustCompile(`windows\[0\]\.masd_threshold</td><td class="mono">8</td><td class="mono">9.5</td>`).MatchString(body) {
		t.Fatalf("v2 page: status %d, diff missing", res.StatusCode)
	}

	// The JSON form: unknown fields and syntax errors are reported clearly.
	for _, c2 := range []struct{ js, words string }{
		{`{"min_bpm": 30, "windws": []}`, "unknown field"},
		{"{\n  \"min_bpm\": 30,\n  \"max_bpm\": }", "line 3"},
		{`{"min_bpm": "thirty"}`, "min_bpm needs a int32"},
	} {
		res, body := a.postFormBody(c, "/admin/protocols", url.Values{"base_id": {strconv.Itoa(v1.ID)}, "mode": {"json"}, "note": {"x"}, "params": {c2.js}})
		if res.StatusCode != http.StatusUnprocessableEntity || !strings.Contains(body, `data-testid="error-params"`) || !strings.Contains(body, c2.words) {
			t.Errorf("JSON %q: status %d, want 422 mentioning %q", c2.js, res.StatusCode, c2.words)
		}
	}
	js := protocolJSON(v1.Params)
	js = strings.Replace(js, `"min_wear_hours": 24`, `"min_wear_hours": 36`, 1)
	if res := a.postForm(c, "/admin/protocols", url.Values{"base_id": {strconv.Itoa(v1.ID)}, "mode": {"json"}, "note": {"more wear"}, "params": {js}}); res.StatusCode != http.StatusSeeOther {
		t.Fatalf("JSON create: status %d", res.StatusCode)
	}

	// Activation, with a background re-screen.
	res = a.postForm(c, v2Path+"/activate", url.Values{"rescreen": {"on"}})
	if res.StatusCode != http.StatusSeeOther {
		t.Fatalf("activate: status %d", res.StatusCode)
	}
	act, err := a.store.ActiveProtocol(context.Background())
	if err != nil || act.Label() != "standard v2" {
		t.Fatalf("active %s (err %v)", act.Label(), err)
	}
	jobs, _ := a.store.Jobs(context.Background(), 10)
	if len(jobs) != 1 || !strings.Contains(jobs[0].Label, "standard v2") || !strings.Contains(jobs[0].CreatedBy, "Test Administrator") {
		t.Fatalf("jobs after activation: %+v", jobs)
	}
	var n int
	a.store.Pool().QueryRow(context.Background(), `SELECT count(*) FROM audit_events WHERE action IN ('protocol.create', 'protocol.activate', 'screen.enqueue') AND actor_id IS NOT NULL`).Scan(&n)
	if n != 4 {
		t.Fatalf("audited protocol changes by the admin: %d, want 4", n)
	}

	for _, path := range []string{"/admin/protocols/999999", "/admin/protocols/999999/new", "/admin/protocols/abc"} {
		if res, _ := a.get(c, path); res.StatusCode != http.StatusNotFound {
			t.Errorf("GET %s: %d, want 404", path, res.StatusCode)
		}
	}
	if res := a.postForm(c, "/admin/protocols/999999/activate", nil); res.StatusCode != http.StatusNotFound {
		t.Errorf("activate unknown: %d", res.StatusCode)
	}
	if res := a.postForm(c, "/admin/protocols", url.Values{"base_id": {"999999"}}); res.StatusCode != http.StatusNotFound {
		t.Errorf("create from unknown: %d", res.StatusCode)
	}
}

func TestScreeningProgressPage(t *testing.T) {
	a := newApp(t)
	a.withProtocol()
	if _, err := a.store.EnqueueScreen(context.Background(), []int64{1, 2}, 0); err != nil {
		t.Fatal(err)
	}
	a.exec(`INSERT INTO jobs (kind, label, state, attempts, error, finished_at) VALUES ('screen', 'A failed run', 'failed', 3, 'attempt 3 of 3: disk full', now())`)
	for _, r := range []cohort.Role{cohort.Coordinator, cohort.Investigator, cohort.Admin} {
		res, body := a.get(a.signIn(r), "/screening")
		if res.StatusCode != 200 || !strings.Contains(body, "Screen 2 participants with standard v1") || !strings.Contains(body, "disk full") ||
			!strings.Contains(body, `hx-trigger="every 3s"`) || !strings.Contains(body, `data-testid="nav-screening"`) {
			t.Errorf("%s: status %d or content missing", r, res.StatusCode)
		}
	}
	if res, _ := a.get(a.signIn(cohort.Monitor), "/screening"); res.StatusCode != http.StatusForbidden {
		t.Errorf("monitor: %d, want 403", res.StatusCode)
	}
}

func (a *app) uploadOne(c *http.Client, path, field, name, content string) (*http.Response, string) {
	a.t.Helper()
	return a.postFile(c, path, nil, field, name, []byte(content))
}

func TestExternalVerdictsUploadAndParticipantPage(t *testing.T) {
	a := newApp(t)
	a.withProtocol()
	pid := a.screenedParticipant("EV-1")
	c := a.signIn(cohort.Coordinator)
	file := "study_id,study_week,score,verdict,model_name,model_version\nEV-1,1,0.93,positive,pulse-judge,4\nEV-404,1,0.1,negative,pulse-judge,4\nEV-1,2,x,negative,pulse-judge,4\n"
	res, body := a.uploadOne(c, "/screening/external", "file", "ext.csv", file)
	if res.StatusCode != 200 || !strings.Contains(body, `data-testid="import-result"`) || !strings.Contains(body, "1 new") ||
		!regexp.MustCompile(`<td class="num">3</td><td>[^<]+</td>`).MatchString(body) || !strings.Contains(body, "EV-404") {
		t.Fatalf("upload: status %d\n%.2000s", res.StatusCode, body)
	}
	res, body = a.uploadOne(c, "/screening/external", "file", "ext.csv", file)
	if res.StatusCode != 200 || !strings.Contains(body, "0 new, 0 changed, 1 duplicates") {
		t.Fatalf("second upload: status %d", res.StatusCode)
	}
	res, body = a.uploadOne(c, "/screening/external", "file", "bad.csv", "who,when\n")
	if res.StatusCode != http.StatusUnprocessableEntity || !strings.Contains(body, `data-testid="error-file"`) {
		t.Fatalf("bad header: status %d", res.StatusCode)
	}
	if res, _ := a.uploadOne(a.signIn(cohort.Investigator), "/screening/external", "file", "ext.csv", file); res.StatusCode != http.StatusForbidden {
		t.Fatalf("investigator upload: %d, want 403", res.StatusCode)
	}
	res, body = a.get(c, "/participants/"+strconv.FormatInt(pid, 10))
	if res.StatusCode != 200 || !strings.Contains(body, `data-testid="external-verdicts"`) || !strings.Contains(body, "External model") || !strings.Contains(body, "pulse-judge 4") {
		t.Fatalf("participant page: status %d, external verdicts missing", res.StatusCode)
	}
}

func TestParticipantChartsAndSweep(t *testing.T) {
	a := newApp(t)
	a.withProtocol()
	pid := a.screenedParticipant("CH-1")
	c := a.signIn(cohort.Investigator)
	res, body := a.get(c, "/participants/"+strconv.FormatInt(pid, 10))
	if res.StatusCode != 200 || !strings.Contains(body, `data-testid="chart-hr-chart"`) || !strings.Contains(body, `data-testid="chart-trend-chart"`) ||
		!strings.Contains(body, "vendor/echarts/echarts.min.js") || !strings.Contains(body, "not been clinically validated") || !strings.Contains(body, "markArea") {
		t.Fatalf("participant page: status %d, charts missing", res.StatusCode)
	}
	if !regexp.MustCompile(`Shaded: 5-minute windows that standard v1 calls irregular .*; [1-9][0-9]* such windows`).MatchString(body) {
		t.Fatal("the chart note does not count the irregular windows of the positive week")
	}
	res, body = a.get(c, "/participants/"+strconv.FormatInt(pid, 10)+"?week=0")
	if res.StatusCode != 200 || !strings.Contains(body, "; 0 such windows") {
		t.Fatalf("steady week: status %d, expected no irregular windows", res.StatusCode)
	}

	res, body = a.get(c, "/sweep")
	if res.StatusCode != 200 || !strings.Contains(body, `data-testid="sweep-form"`) || strings.Contains(body, `data-testid="sweep-table"`) {
		t.Fatalf("sweep form: status %d", res.StatusCode)
	}
	// A sweep is asked for, runs in the background and is then shown.
	res = a.postForm(c, "/sweep", url.Values{"param": {"windows[0].masd_threshold"}, "from": {"4"}, "to": {"40"}, "steps": {"3"}})
	loc := res.Header.Get("Location")
	if res.StatusCode != http.StatusSeeOther || !strings.HasPrefix(loc, "/sweep?run=") {
		t.Fatalf("start a sweep: status %d, location %q", res.StatusCode, loc)
	}
	res, body = a.get(c, loc)
	if res.StatusCode != 200 || !strings.Contains(body, `data-testid="sweep-progress"`) || strings.Contains(body, `data-testid="sweep-table"`) {
		t.Fatalf("queued sweep: status %d\n%.3000s", res.StatusCode, body)
	}
	poll, _ := http.NewRequest("GET", a.ts.URL+loc, nil)
	poll.Header.Set("HX-Request", "true")
	if res, err := c.Do(poll); err != nil || res.StatusCode != http.StatusNoContent || res.Header.Get("HX-Refresh") != "" {
		t.Fatalf("poll while queued: %v %v", res, err)
	}
	w := &db.Worker{Store: a.store, Handlers: db.NewScreener(a.store, nil).Handlers()}
	if ok, err := w.RunOne(context.Background(), 0); !ok || err != nil {
		t.Fatalf("run the sweep: %v %v", ok, err)
	}
	if res, err := c.Do(poll); err != nil || res.StatusCode != http.StatusNoContent || res.Header.Get("HX-Refresh") != "true" {
		t.Fatalf("poll once done: %v %v", res, err)
	}
	res, body = a.get(c, loc)
	if res.StatusCode != 200 || !strings.Contains(body, `data-testid="chart-sweep-chart"`) || strings.Count(body, "<tr data-row>") != 3 {
		t.Fatalf("sweep run: status %d\n%.3000s", res.StatusCode, body)
	}
	if !strings.Contains(body, `data-testid="sweep-recent"`) || !strings.Contains(body, `href="`+loc+`"`) {
		t.Fatal("the sweep is not listed among the latest")
	}
	res, body = a.postFormBody(c, "/sweep", url.Values{"param": {"windows[0].run_length"}, "from": {"-5"}, "to": {"1"}, "steps": {"3"}})
	if res.StatusCode != http.StatusUnprocessableEntity || !strings.Contains(body, `data-testid="error-values"`) {
		t.Fatalf("invalid sweep: status %d", res.StatusCode)
	}
	res = a.postForm(c, "/sweep", url.Values{"from": {"x"}, "steps": {"500"}})
	if res.StatusCode != http.StatusUnprocessableEntity {
		t.Fatalf("unreadable sweep: status %d", res.StatusCode)
	}
	if res, _ := a.get(c, "/sweep?run=999999"); res.StatusCode != http.StatusNotFound {
		t.Fatalf("unknown sweep: %d, want 404", res.StatusCode)
	}
	if res, _ := a.get(a.signIn(cohort.Coordinator), "/sweep"); res.StatusCode != http.StatusForbidden {
		t.Fatalf("coordinator sweep page: %d, want 403", res.StatusCode)
	}
}
