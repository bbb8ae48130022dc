package web

import (
	"context"
	"net/http"
	"net/http/httptest"
	"net/url"
	"slices"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/credential"
	"cohortdesk/db"
	"cohortdesk/db/dbtest"
)

// benchNow is the progress benchmark's "today": a Monday, thirteen weeks
// after the first enrolment of seedTriageScale's study and four and a half
// after its last, so every participant is in follow-up.
var benchNow = time.Date(2026, 4, 6, 12, 0, 0, 0, time.UTC)

// seedProgressScale adds to seedTriageScale's 20,000 participants what the
// progress pages read: a study with 16 weeks of follow-up and a target per
// site, a screening result for every completed participant-week (positive
// in the first week of each case, one week in ten without enough wear, the
// rest negative) and a summary row of wear data for every week begun, with
// one participant in twenty gone silent three weeks ago. The cases'
// history is moved back so it happened before benchNow.
func seedProgressScale(tb testing.TB, store *db.Store) {
	tb.Helper()
	ctx := context.Background()
	var shift time.Duration
	if err := store.Pool().QueryRow(ctx, `SELECT $1::timestamptz - now()`, benchNow).Scan(&shift); err != nil {
		tb.Fatal(err)
	}
	for _, q := range []struct {
		sql  string
		args []any
	}{
		{`INSERT INTO study (id, name, follow_up_weeks, enrolment_target) VALUES (1, 'Benchmark study', 16, 24000)`, nil},
		{`UPDATE sites SET target = 8000`, nil},
		{`UPDATE cases SET flagged_at = flagged_at + $1::interval, due_at = due_at + $1, reached_at = reached_at + $1,
		    recorder_sent_at = recorder_sent_at + $1, recording_back_at = recording_back_at + $1, closed_at = closed_at + $1`, []any{shift}},
		{`UPDATE recordings SET taken_at = taken_at + $1::interval, received_at = received_at + $1`, []any{shift}},
		{`UPDATE over_reads SET read_on = (read_on + $1::interval)::date`, []any{shift}},
		{`INSERT INTO screen_results (participant_id, protocol_id, week, verdict, reason, result, input_digest, wear_hours)
		  SELECT p.id, 1, w.n,
		         CASE WHEN EXISTS (SELECT 1 FROM cases c WHERE c.participant_id = p.id AND c.first_week = w.n) THEN 'positive'
		              WHEN (p.id + w.n) % 10 = 0 THEN 'insufficient' ELSE 'negative' END,
		         'bench', '{}', 'd', 100
		  FROM participants p CROSS JOIN LATERAL generate_series(0, ($1::date - p.enrolled_on) / 7 - 1) AS w(n)`, []any{benchNow}},
		{`INSERT INTO wear_weeks (participant_id, week, kind, n, first_ms, last_ms, data)
		  SELECT p.id, w.n, 1, 2000, extract(epoch FROM (p.enrolled_on + 7 * w.n)::timestamptz)::bigint * 1000,
		         extract(epoch FROM least($1::timestamptz - CASE WHEN p.id % 20 = 0 THEN interval '21 days' ELSE interval '1 hour' END,
		                                  (p.enrolled_on + 7 * w.n + 7)::timestamptz))::bigint * 1000, ''::bytea
		  FROM participants p CROSS JOIN LATERAL generate_series(0, ($1::date - p.enrolled_on) / 7) AS w(n)
		  WHERE p.id % 20 <> 0 OR p.enrolled_on + 7 * w.n < $1::date - 21`, []any{benchNow}},
		{`VACUUM ANALYZE`, nil}, // as autovacuum leaves tables after a bulk load
	} {
		if _, err := store.Pool().Exec(ctx, q.sql, q.args...); err != nil {
			tb.Fatalf("seed: %v\n%s", err, q.sql)
		}
	}
}

// BenchmarkProgressPages measures the server time of the progress page
// (enrolment and projection, data sufficiency, silent participants, the
// cascade), the weekly report (the same plus the agreement figures, from one
// read) and the first page of the largest cascade box, through the whole
// handler stack, at 20,000 participants with 3,000 cases, about 175,000
// screening results and 180,000 weeks of wear summaries. As a baseline
// measured in the same run (requests interleaved, so a busy machine slows
// all alike) it reports the start page, and each page's ratio to it.
//
//	go test -run '^$' -bench BenchmarkProgressPages -benchtime 40x ./web/
func BenchmarkProgressPages(b *testing.B) {
	pool := dbtest.Pool(b)
	clock := func() time.Time { return benchNow }
	store := db.New(pool, clock)
	h := New(Config{Store: store, Pool: pool, Password: credential.TestParams, Now: clock}).Handler()
	hash, err := credential.Hash(testPassword, credential.TestParams)
	if err != nil {
		b.Fatal(err)
	}
	u, err := store.CreateUser(context.Background(), cohort.System, db.NewUser{Email: "inv@example.org", Name: "Investigator", Role: cohort.Investigator, PasswordHash: hash})
	if err != nil {
		b.Fatal(err)
	}
	seedTriageScale(b, store, []int64{u.ID})
	seedProgressScale(b, store)
	signin := httptest.NewRequest("POST", "/signin", strings.NewReader(url.Values{"email": {"inv@example.org"}, "password": {testPassword}}.Encode()))
	signin.Header.Set("Content-Type", "application/x-www-form-urlencoded")
	rec := httptest.NewRecorder()
	h.ServeHTTP(rec, signin)
	if rec.Code != http.StatusSeeOther {
		b.Fatalf("sign in: status %d", rec.Code)
	}
	cookies := rec.Result().Cookies()
	pages := []struct{ name, path string }{
		{"progress", "/progress"},
		{"report", "/progress/report"},
		{"box", "/progress/cascade/enrolled"},
		{"home", "/"},
	}
	samples := map[string][]time.Duration{}
	size := map[string]int{}
	timed := func(name, path string) {
		req := httptest.NewRequest("GET", path, nil)
		for _, c := range cookies {
			req.AddCookie(c)
		}
		rec := httptest.NewRecorder()
		start := time.Now()
		h.ServeHTTP(rec, req)
		samples[name] = append(samples[name], time.Since(start))
		if rec.Code != http.StatusOK {
			b.Fatalf("%s: status %d", path, rec.Code)
		}
		size[name] = rec.Body.Len()
	}
	// The pages must carry the figures of the whole study.
	timed("check", "/progress/report")
	if rec := httptest.NewRecorder(); true {
		req := httptest.NewRequest("GET", "/progress", nil)
		for _, c := range cookies {
			req.AddCookie(c)
		}
		h.ServeHTTP(rec, req)
		if got := byTestID(rec.Body.String(), "cascade-count-enrolled"); got != "20000" {
			b.Fatalf("the cascade counts %q enrolled, want 20000", got)
		}
	}
	b.ResetTimer()
	for b.Loop() {
		for _, p := range pages {
			timed(p.name, p.path)
		}
	}
	b.StopTimer()
	at := func(name string, q float64) float64 {
		s := slices.Clone(samples[name])
		slices.Sort(s)
		return float64(s[int(q*float64(len(s)-1))].Microseconds()) / 1000
	}
	for _, p := range pages {
		b.ReportMetric(at(p.name, 0.50), p.name+"-p50-ms")
		b.ReportMetric(at(p.name, 0.95), p.name+"-p95-ms")
		if p.name != "home" {
			b.ReportMetric(at(p.name, 0.50)/at("home", 0.50), p.name+"-x-home-p50")
			b.ReportMetric(float64(size[p.name]), p.name+"-bytes")
		}
	}
}
