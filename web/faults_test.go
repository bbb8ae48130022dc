package web

import (
	"context"
	"fmt"
	"io"
	"mime/multipart"
	"net/http"
	"net/http/httptest"
	"net/url"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/credential"
	"cohortdesk/db"
	"cohortdesk/db/dbtest"
	"cohortdesk/db/pgcluster"
	"cohortdesk/migrations"

	"github.com/jackc/pgx/v5/pgxpool"
)

// unavailableHeading is the heading of the 503 page (respond.go).
const unavailableHeading = "The database cannot take changes right now"

// snapshot fingerprints every table of the database except the session
// store, whose idle-timeout refresh is allowed to fail or succeed, and the
// list of imports, which records a failed import (checked apart): for each
// table its row count and a digest of its rows in a fixed order.
func snapshot(t *testing.T, pool *pgxpool.Pool) map[string]string {
	t.Helper()
	ctx := context.Background()
	rows, err := pool.Query(ctx, `SELECT tablename FROM pg_tables WHERE schemaname = 'public' AND tablename NOT IN ('sessions', 'imports') ORDER BY 1`)
	if err != nil {
		t.Fatal(err)
	}
	var tables []string
	for rows.Next() {
		var n string
		if err := rows.Scan(&n); err != nil {
			t.Fatal(err)
		}
		tables = append(tables, n)
	}
	out := map[string]string{}
	for _, tb := range tables {
		var n int64
		var digest string
		q := fmt.Sprintf(`SELECT count(*), coalesce(md5(string_agg(x::text, '|' ORDER BY x::text)), '') FROM %q x`, tb)
		if err := pool.QueryRow(ctx, q).Scan(&n, &digest); err != nil {
			t.Fatalf("snapshot %s: %v", tb, err)
		}
		out[tb] = fmt.Sprintf("%d rows, %s", n, digest)
	}
	return out
}

func sameSnapshot(t *testing.T, before, after map[string]string, when string) {
	t.Helper()
	for tb, b := range before {
		if after[tb] != b {
			t.Errorf("%s: table %s changed: %s -> %s", when, tb, b, after[tb])
		}
	}
}

// formCase is one valid submission of a form that changes the database.
type formCase struct {
	role cohort.Role
	path string
	form url.Values
}

// validForms are submissions that succeed on a writable database (the test
// proves it), so a refusal while the database takes no changes is the
// database's doing.
func validForms(a *app, caseIDs []int64, participantID int64) []formCase {
	c := func(i int) string { return strconv.FormatInt(caseIDs[i], 10) }
	p := strconv.FormatInt(participantID, 10)
	monitor := strconv.FormatInt(a.users[cohort.Monitor].ID, 10)
	return []formCase{
		{cohort.Coordinator, "/participants/" + p + "/notes", url.Values{"body": {"prefers calls after six"}}},
		{cohort.Coordinator, "/cases/" + c(0) + "/assign", url.Values{"version": {"1"}, "owner": {"me"}}},
		{cohort.Coordinator, "/cases/" + c(1) + "/attempts", url.Values{"version": {"1"}, "channel": {"phone"}, "outcome": {"no_answer"}}},
		{cohort.Coordinator, "/cases/" + c(2) + "/note", url.Values{"version": {"1"}, "note": {"call in the morning"}}},
		{cohort.Coordinator, "/cases/bulk/assign", url.Values{"case": {c(3) + ":1"}, "bulk-owner": {"me"}, "back": {"/cases"}}},
		{cohort.Coordinator, "/participants/" + p + "/withdraw", url.Values{"withdrawn_on": {"2026-02-01"}, "reason": {"moved away"}, "version": {"1"}}},
		{cohort.Admin, "/admin/users", url.Values{"email": {"new.reader@example.org"}, "name": {"New Reader"}, "role": {"monitor"}}},
		{cohort.Admin, "/admin/users/" + monitor + "/password", nil},
		{cohort.Admin, "/admin/study", url.Values{"name": {"Rhythm follow-up study"}, "time_zone": {"America/Denver"}, "enrolment_target": {"1200"},
			"first_contact_working_days": {"2"}, "max_attempts": {"5"}, "give_up_after_days": {"14"}, "recorder_send_within_days": {"5"},
			"recording_back_within_days": {"14"}, "over_read_within_days": {"6"}, "refer_or_close_within_days": {"3"},
			"episode_gap_weeks": {"2"}, "closure_days": {"2026-12-24"}}},
		{cohort.Coordinator, "/signout", nil},
	}
}

// uploadCSV posts a small readings file through the import form.
func uploadCSV(t *testing.T, a *app, c *http.Client, body string) *http.Response {
	t.Helper()
	pr, pw := io.Pipe()
	mw := multipart.NewWriter(pw)
	go func() {
		_ = mw.WriteField("kind", db.ImportReadingsCSV)
		fw, _ := mw.CreateFormFile("file", "small.csv")
		_, _ = io.WriteString(fw, body)
		pw.CloseWithError(mw.Close())
	}()
	res, err := c.Post(a.ts.URL+"/imports", mw.FormDataContentType(), pr)
	if err != nil {
		t.Fatal(err)
	}
	io.Copy(io.Discard, res.Body)
	res.Body.Close()
	return res
}

// TestReadOnlyAndFullDatabase makes the database refuse changes in the two
// ways production meets - read-only (SQLSTATE 25006, as after a fail-over to
// a replica or `default_transaction_read_only`) and out of disk space
// (SQLSTATE 53100, simulated by a trigger that raises it when the audit event
// every change writes is inserted) - and submits every kind of form: each
// answers with the 503 page, nothing in the database changes, and reading
// pages keeps working. Once the database takes changes again, the same
// submissions succeed, which proves they were valid.
func TestReadOnlyAndFullDatabase(t *testing.T) {
	a := newApp(t)
	ctx := context.Background()
	caseIDs := seedFollowUp(t, a.store, 5)
	c, err := a.store.Case(ctx, caseIDs[4])
	if err != nil {
		t.Fatal(err)
	}
	clients := map[cohort.Role]*http.Client{}
	for _, r := range []cohort.Role{cohort.Coordinator, cohort.Admin, cohort.Monitor} {
		clients[r] = a.signIn(r)
	}
	forms := validForms(a, caseIDs, c.ParticipantID)
	var dbName string
	if err := a.store.Pool().QueryRow(ctx, `SELECT current_database()`).Scan(&dbName); err != nil {
		t.Fatal(err)
	}
	admin, err := pgxpool.New(ctx, dbtest.Cluster().URL("postgres"))
	if err != nil {
		t.Fatal(err)
	}
	defer admin.Close()

	for _, mode := range []struct {
		name    string
		on, off func()
	}{
		{"read-only", func() {
			if _, err := admin.Exec(ctx, fmt.Sprintf(`ALTER DATABASE %q SET default_transaction_read_only = on`, dbName)); err != nil {
				t.Fatal(err)
			}
			a.store.Pool().Reset() // the setting applies to new connections
		}, func() {
			if _, err := admin.Exec(ctx, fmt.Sprintf(`ALTER DATABASE %q RESET default_transaction_read_only`, dbName)); err != nil {
				t.Fatal(err)
			}
			a.store.Pool().Reset()
		}},
		{"disk full", func() {
			// Only the schema's owner may add a trigger to the audit table.
			owner := dbtest.Owner(t, a.store.Pool())
			exec := func(sql string) {
				if _, err := owner.Exec(ctx, sql); err != nil {
					t.Fatalf("%s: %v", sql, err)
				}
			}
			exec(`CREATE FUNCTION simulate_disk_full() RETURNS trigger LANGUAGE plpgsql AS $$
				BEGIN RAISE EXCEPTION 'could not extend file: No space left on device' USING ERRCODE = 'disk_full'; END $$`)
			exec(`CREATE TRIGGER simulate_disk_full BEFORE INSERT ON audit_events FOR EACH STATEMENT EXECUTE FUNCTION simulate_disk_full()`)
		}, func() {
			owner := dbtest.Owner(t, a.store.Pool())
			for _, sql := range []string{`DROP TRIGGER simulate_disk_full ON audit_events`, `DROP FUNCTION simulate_disk_full()`} {
				if _, err := owner.Exec(ctx, sql); err != nil {
					t.Fatalf("%s: %v", sql, err)
				}
			}
		}},
	} {
		t.Run(mode.name, func(t *testing.T) {
			before := snapshot(t, a.store.Pool())
			mode.on()
			for _, f := range forms {
				res, body := a.postFormBody(clients[f.role], f.path, f.form)
				if res.StatusCode != http.StatusServiceUnavailable || !strings.Contains(body, unavailableHeading) {
					t.Errorf("%s %s: status %d, want 503 with the unavailable page:\n%.400s", f.role, f.path, res.StatusCode, body)
				}
			}
			if res := uploadCSV(t, a, clients[cohort.Coordinator], "study_id,time,kind,value\nRV-0001,2026-01-06T08:00:00Z,heart_rate,61\n"); res.StatusCode != http.StatusServiceUnavailable {
				t.Errorf("import: status %d, want 503", res.StatusCode)
			}
			res, body := a.postFormBody(a.client(), "/signin", url.Values{"email": {"investigator@example.org"}, "password": {testPassword}})
			if res.StatusCode != http.StatusServiceUnavailable || !strings.Contains(body, unavailableHeading) {
				t.Errorf("sign-in: status %d, want 503", res.StatusCode)
			}
			// Pages that only read still work. (Lists with names write an
			// audit event for the PHI shown, so they too wait for the database.)
			for _, p := range []struct {
				role cohort.Role
				path string
			}{{cohort.Coordinator, "/"}, {cohort.Coordinator, "/triage"}, {cohort.Coordinator, "/cases"}, {cohort.Monitor, "/participants"}, {cohort.Admin, "/admin/users"}} {
				if res, _ := a.get(clients[p.role], p.path); res.StatusCode != http.StatusOK {
					t.Errorf("%s %s: status %d, want 200", p.role, p.path, res.StatusCode)
				}
			}
			// Whatever a form is sent with, the answer is never a bare 500.
			for _, rt := range a.srv.routeTable {
				if rt.method != http.MethodPost {
					continue
				}
				path := strings.NewReplacer("{id}", strconv.FormatInt(caseIDs[0], 10)).Replace(rt.pattern)
				for _, role := range []cohort.Role{cohort.Coordinator, cohort.Admin} {
					if res, _ := a.postFormBody(clients[role], path, url.Values{"version": {"1"}}); res.StatusCode == http.StatusInternalServerError {
						t.Errorf("%s %s with a bare form: 500", role, path)
					}
				}
			}
			sameSnapshot(t, before, snapshot(t, a.store.Pool()), mode.name)
			var unfinished int
			if err := a.store.Pool().QueryRow(ctx, `SELECT count(*) FROM imports WHERE status <> 'failed'`).Scan(&unfinished); err != nil || unfinished != 0 {
				t.Errorf("%d imports recorded as other than failed (err %v)", unfinished, err)
			}
			mode.off()
		})
	}
	// The same submissions go through once the database takes changes.
	for _, f := range forms {
		if res := a.postForm(clients[f.role], f.path, f.form); res.StatusCode >= 400 {
			t.Errorf("writable again: %s %s: status %d, want success", f.role, f.path, res.StatusCode)
		}
	}
}

// TestDatabaseRestartWhileServing stops PostgreSQL under a running app and
// starts it again: while it is down /ready answers 503 and pages answer the
// 503 page (not a crash or a bare 500); once it is back the same app, without
// a restart, is ready again and the session made before the outage still
// works, because the pgx pool replaces its broken connections.
func TestDatabaseRestartWhileServing(t *testing.T) {
	ctx := context.Background()
	dir, err := os.MkdirTemp("", "cohortdesk-restart-")
	if err != nil {
		t.Fatal(err)
	}
	defer os.RemoveAll(dir)
	if err := os.Chmod(dir, 0o755); err != nil { // the server user must pass when run as root
		t.Fatal(err)
	}
	cfg := pgcluster.Config{Dir: filepath.Join(dir, "pg"), Fast: true}
	cl, err := pgcluster.Start(ctx, cfg, os.Getenv)
	if err != nil {
		t.Fatal(err)
	}
	defer func() { cl.Stop() }() // the cluster started last
	setup, err := pgxpool.New(ctx, cl.URL("postgres"))
	if err != nil {
		t.Fatal(err)
	}
	if _, err := setup.Exec(ctx, "CREATE DATABASE app"); err != nil {
		t.Fatal(err)
	}
	setup.Close()
	pool, err := db.Open(ctx, cl.URL("app"), 4)
	if err != nil {
		t.Fatal(err)
	}
	defer pool.Close()
	if _, err := migrations.Up(ctx, pool); err != nil {
		t.Fatal(err)
	}
	// As in the test template: the coordinator signs in with a password alone.
	if _, err := pool.Exec(ctx, `UPDATE sign_in_policy SET second_factor_required = false`); err != nil {
		t.Fatal(err)
	}
	store := db.New(pool, nil)
	hash, err := credential.Hash(testPassword, credential.TestParams)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := store.CreateUser(ctx, cohort.System, db.NewUser{Email: "coordinator@example.org", Name: "Test Coordinator", Role: cohort.Coordinator, PasswordHash: hash}); err != nil {
		t.Fatal(err)
	}
	srv := New(Config{Store: store, Pool: pool, Password: credential.TestParams})
	ts := httptest.NewServer(srv.Handler())
	defer ts.Close()
	a := &app{t: t, ts: ts, store: store, srv: srv}
	c := a.signIn(cohort.Coordinator)
	status := func(path string) (int, string) {
		res, body := a.get(c, path)
		return res.StatusCode, body
	}
	if code, _ := status("/ready"); code != http.StatusOK {
		t.Fatalf("ready before the outage: %d", code)
	}
	if code, _ := status("/"); code != http.StatusOK {
		t.Fatalf("home before the outage: %d", code)
	}

	if err := cl.Stop(); err != nil {
		t.Fatal(err)
	}
	if code, _ := status("/ready"); code != http.StatusServiceUnavailable {
		t.Errorf("ready while PostgreSQL is down: %d, want 503", code)
	}
	for _, p := range []string{"/", "/triage", "/cases"} {
		if code, body := status(p); code != http.StatusServiceUnavailable || !strings.Contains(body, unavailableHeading) {
			t.Errorf("%s while PostgreSQL is down: %d, want the 503 page:\n%.300s", p, code, body)
		}
	}
	if res, _ := a.get(a.client(), "/health"); res.StatusCode != http.StatusOK {
		t.Errorf("health while PostgreSQL is down: %d, want 200 (the process is alive)", res.StatusCode)
	}

	// Started again as the demo command starts it: same folder, same data, and
	// (the socket living in the data folder) the same address the pool knows.
	url := cl.URL("app")
	if cl, err = pgcluster.Start(ctx, cfg, os.Getenv); err != nil {
		t.Fatal(err)
	}
	if cl.URL("app") != url {
		t.Fatalf("the restarted server answers at %s, the app's pool at %s", cl.URL("app"), url)
	}
	ready := false
	for i := 0; i < 300 && !ready; i++ { // bounded: 30 s
		code, _ := status("/ready")
		ready = code == http.StatusOK
		if !ready {
			time.Sleep(100 * time.Millisecond)
		}
	}
	if !ready {
		t.Fatal("ready never recovered after PostgreSQL came back")
	}
	if code, body := status("/"); code != http.StatusOK || !strings.Contains(body, "Test Coordinator") {
		t.Fatalf("home after the outage: %d; the session made before it should still hold", code)
	}
}
