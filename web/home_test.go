package web

import (
	"context"
	"errors"
	"io"
	"net/http"
	"net/http/httptest"
	"regexp"
	"strconv"
	"strings"
	"testing"

	"cohortdesk/cohort"
	"cohortdesk/cohort/demo"
	"cohortdesk/db/dbtest"
)

func TestMain(m *testing.M) { dbtest.Main(m) }

func get(t *testing.T, url string) (*http.Response, string) {
	t.Helper()
	res, err := http.Get(url)
	if err != nil {
		t.Fatal(err)
	}
	defer res.Body.Close()
	b, _ := io.ReadAll(res.Body)
	return res, string(b)
}

func TestHomeShowsCountsFromDatabase(t *testing.T) {
	a := newApp(t)
	ctx := context.Background()
	_, err := a.store.Pool().Exec(ctx, `
		INSERT INTO sites (code, name) VALUES ('NW', 'North West'), ('SE', 'South East');
		INSERT INTO participants (study_id, site_id, time_zone, enrolled_on, withdrawn_on)
		SELECT 'P' || g, 1 + g % 2, 'UTC', date '2026-01-01', CASE WHEN g = 3 THEN date '2026-02-01' END
		FROM generate_series(1, 7) g;`)
	if err != nil {
		t.Fatal(err)
	}
	a.drainFigures()
	res, body := a.get(a.signIn(cohort.Monitor), "/")
	if res.StatusCode != 200 {
		t.Fatalf("status %d", res.StatusCode)
	}
	for _, want := range []string{
		`data-testid="tile-participants"><div class="num">7<`,
		`data-testid="tile-active"><a href="/participants?status=active"><div class="num">6<`,
		`data-testid="tile-withdrawn"><a href="/participants?status=withdrawn"><div class="num">1<`,
		`data-testid="tile-completed"><a href="/participants?status=completed"><div class="num">0<`,
		`data-testid="tile-sites"><div class="num">2<`,
		`data-testid="cautions"`,
	} {
		if !strings.Contains(body, want) {
			t.Errorf("home page lacks %s", want)
		}
	}
}

func TestHealthAndReadiness(t *testing.T) {
	a := newApp(t)
	for _, p := range []string{"/health", "/ready"} {
		if res, _ := get(t, a.ts.URL+p); res.StatusCode != 200 {
			t.Errorf("%s: status %d", p, res.StatusCode)
		}
	}
}

// downStore fails every query, as a database that went away.
type downStore struct{ Store }

func (downStore) Ping(context.Context) error { return errors.New("connection refused") }

func TestReadyIs503WhenDatabaseIsDown(t *testing.T) {
	ts := httptest.NewServer(New(Config{Store: downStore{}}).Handler())
	defer ts.Close()
	if res, _ := get(t, ts.URL+"/ready"); res.StatusCode != http.StatusServiceUnavailable {
		t.Fatalf("status %d, want 503", res.StatusCode)
	}
	if res, _ := get(t, ts.URL+"/health"); res.StatusCode != 200 {
		t.Fatalf("health status %d, want 200 while the process runs", res.StatusCode)
	}
}

func TestSecurityHeadersAndNotFound(t *testing.T) {
	a := newApp(t)
	res, body := a.get(a.signIn(cohort.Coordinator), "/no/such/page")
	if res.StatusCode != 404 {
		t.Fatalf("status %d, want 404", res.StatusCode)
	}
	if !strings.Contains(body, `data-testid="error-heading"`) {
		t.Error("404 is not our error page")
	}
	h := res.Header
	for k, want := range map[string]string{
		"X-Content-Type-Options": "nosniff",
		"Referrer-Policy":        "same-origin",
	} {
		if got := h.Get(k); got != want {
			t.Errorf("%s = %q, want %q", k, got, want)
		}
	}
	csp := h.Get("Content-Security-Policy")
	for _, want := range []string{"script-src 'self'", "frame-ancestors 'none'"} {
		if !strings.Contains(csp, want) {
			t.Errorf("CSP %q lacks %q", csp, want)
		}
	}
	if strings.Contains(csp, "unsafe-inline") {
		t.Errorf("CSP allows inline code: %q", csp)
	}
	if h.Get("X-Request-Id") == "" {
		t.Error("no request id")
	}
}

func TestAssetsAreHashedAndLocal(t *testing.T) {
	a := newApp(t)
	ts := a.ts
	_, body := a.get(a.signIn(cohort.Coordinator), "/")
	for _, tag := range []string{`src="`, `href="`} {
		for _, part := range strings.Split(body, tag)[1:] {
			u := part[:strings.IndexByte(part, '"')]
			if strings.HasPrefix(u, "http") || strings.HasPrefix(u, "//") {
				t.Errorf("page loads %s from another host", u)
			}
			if strings.HasPrefix(u, "/assets/") {
				res, _ := get(t, ts.URL+u)
				if res.StatusCode != 200 {
					t.Errorf("%s: status %d", u, res.StatusCode)
				}
				if !strings.Contains(res.Header.Get("Cache-Control"), "immutable") {
					t.Errorf("%s not cached as immutable", u)
				}
			}
		}
	}
}

// TestHomeShowsTodaysWorkCasesAndLastImport: on a small demo study the start
// page's follow-up figures are the triage page's own counts, its cases by
// state agree with a count made here in SQL, and what it offers follows the
// route table: the day's work and the latest import only to roles that may
// open triage and imports, links only where they lead.
func TestHomeShowsTodaysWorkCasesAndLastImport(t *testing.T) {
	// At the demo's own today, so no day turns between the two pages.
	a := newAppAt(t, demo.DefaultToday())
	loadDemo(t, a, 80)
	coord := a.signIn(cohort.Coordinator)
	_, home := a.get(coord, "/")
	_, triage := a.get(coord, "/triage")
	for _, key := range []string{"overdue", "today", "new", "overread", "scheduled"} {
		got, want := byTestID(home, "tile-work-"+key), byTestID(triage, "count-"+key)
		if got == "" || got != want {
			t.Errorf("work tile %s reads %q, the triage page %q", key, got, want)
		}
	}
	rows, err := a.store.Pool().Query(context.Background(), `SELECT state, count(*) FROM cases GROUP BY state`)
	if err != nil {
		t.Fatal(err)
	}
	want := map[string]string{}
	for rows.Next() {
		var st string
		var n int
		if err := rows.Scan(&st, &n); err != nil {
			t.Fatal(err)
		}
		want[st] = strconv.Itoa(n)
	}
	if len(want) < 3 {
		t.Fatalf("the demo study has cases in %d states; the test needs several", len(want))
	}
	if got := testIDs(home, "home-cases-"); len(got) != len(want) {
		t.Errorf("states shown %v, want %d", got, len(want))
	}
	for st, n := range want {
		if got := byTestID(home, "home-cases-"+st); !strings.HasSuffix(got, " "+n) {
			t.Errorf("state %s: %q, want the count %s", st, got, n)
		}
		if !strings.Contains(home, `href="/cases?state=`+st+`"`) {
			t.Errorf("state %s does not link to its case list", st)
		}
	}
	if !regexp.MustCompile(`data-testid="home-last-import"><a href="/imports/\d+">`).MatchString(home) {
		t.Error("the coordinator's start page does not show the latest import with its link")
	}

	_, monitor := a.get(a.signIn(cohort.Monitor), "/")
	for _, absent := range []string{`data-testid="home-work"`, `data-testid="home-last-import"`, `href="/triage`, `href="/imports`} {
		if strings.Contains(monitor, absent) {
			t.Errorf("the monitor's start page shows %s", absent)
		}
	}
	if testIDs(monitor, "home-cases-") == nil {
		t.Error("the monitor's start page lacks the cases by state")
	}
	_, inv := a.get(a.signIn(cohort.Investigator), "/")
	if !strings.Contains(inv, `data-testid="home-work"`) || strings.Contains(inv, `data-testid="home-last-import"`) {
		t.Error("the investigator's start page: the day's work is for case workers, the import line for importers")
	}
}
