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

// seedTriageScale fills a database the size of a large study: 20,000
// participants over three sites, 2,000 cases still being worked in every
// working state (with contact attempts, recordings and over-reads) and 1,000
// closed ones, all by SQL so the setup takes seconds.
func seedTriageScale(tb testing.TB, store *db.Store, owners []int64) {
	tb.Helper()
	ctx := context.Background()
	for _, q := range []struct {
		sql  string
		args []any
	}{
		{`INSERT INTO sites (code, name) VALUES ('NO', 'North'), ('SO', 'South'), ('EA', 'East')`, nil},
		{`INSERT INTO participants (study_id, site_id, time_zone, enrolled_on)
		  SELECT 'BP-' || lpad(g::text, 6, '0'), 1 + g % 3, 'UTC', date '2026-01-05' + (g % 60) FROM generate_series(1, 20000) g`, nil},
		{`INSERT INTO protocols (name, version, params, active, used) VALUES ('weekly screen', 1, '{}', true, true)`, nil},
		// 2,000 working cases on every tenth participant: 40% open (half of
		// them unowned), 25% contacting, 10% reached, 15% recorder sent, 10%
		// recording received; deadlines from five days ago to ten days ahead.
		{`INSERT INTO cases (participant_id, protocol_id, first_week, last_week, state, owner_id, flagged_at, next_action, due_at,
		    reached_at, recorder_sent_at, recording_back_at)
		  SELECT p.id, 1, 2 + g % 10, 2 + g % 10, s.state,
		         CASE WHEN s.state = 'open' AND g % 2 = 0 THEN NULL ELSE ($1::bigint[])[1 + g % cardinality($1::bigint[])] END,
		         now() - (g % 20) * interval '1 day', 'first_contact', now() + ((g % 16) - 5) * interval '1 day' + (g % 24) * interval '1 hour',
		         CASE WHEN s.state IN ('reached', 'recorder_sent', 'recording_received') THEN now() - interval '3 days' END,
		         CASE WHEN s.state IN ('recorder_sent', 'recording_received') THEN now() - interval '2 days' END,
		         CASE WHEN s.state = 'recording_received' THEN now() - interval '1 day' END
		  FROM generate_series(1, 2000) g
		  JOIN participants p ON p.study_id = 'BP-' || lpad((g * 10)::text, 6, '0')
		  CROSS JOIN LATERAL (SELECT CASE WHEN g % 20 < 8 THEN 'open' WHEN g % 20 < 13 THEN 'contacting' WHEN g % 20 < 15 THEN 'reached'
		                                  WHEN g % 20 < 18 THEN 'recorder_sent' ELSE 'recording_received' END AS state) s`, []any{owners}},
		// 1,000 closed cases on other participants.
		{`INSERT INTO cases (participant_id, protocol_id, first_week, last_week, state, flagged_at, closed_at, closing_note)
		  SELECT p.id, 1, 3, 3, 'closed_unreachable', now() - interval '60 days', now() - interval '20 days', 'no answer'
		  FROM generate_series(1, 1000) g JOIN participants p ON p.study_id = 'BP-' || lpad((g * 10 + 5)::text, 6, '0')`, nil},
		{`INSERT INTO contact_attempts (case_id, participant_id, at, channel, outcome)
		  SELECT c.id, c.participant_id, c.flagged_at + k * interval '1 day', 'phone', 'no_answer'
		  FROM cases c CROSS JOIN generate_series(1, 2) k WHERE c.state = 'contacting'`, nil},
		{`INSERT INTO recordings (case_id, participant_id, taken_at, duration_s)
		  SELECT id, participant_id, recording_back_at, 30 FROM cases WHERE state = 'recording_received'`, nil},
		{`INSERT INTO over_reads (recording_id, case_id, participant_id, role, rhythm, reader, read_on)
		  SELECT id, case_id, participant_id, 'first', 'sinus', 'reader', current_date FROM recordings WHERE id % 2 = 0`, nil},
		{`ANALYZE`, nil},
	} {
		if _, err := store.Pool().Exec(ctx, q.sql, q.args...); err != nil {
			tb.Fatalf("seed: %v\n%s", err, q.sql)
		}
	}
}

// BenchmarkTriagePage measures the server time of the triage page (session,
// queries, ordering and rendering, through the whole handler stack) at
// 20,000 participants and 2,000 working cases. It reports the median and the
// 95th percentile of the sampled requests in milliseconds and, as a baseline
// measured in the same run (requests interleaved, so a busy machine slows
// both alike), the same figures for the start page, whose work is a session,
// four counts and the layout; the ratio of the medians says how much dearer
// triage is than the cheapest page.
//
//	go test -run '^$' -bench BenchmarkTriagePage -benchtime 300x ./web/
func BenchmarkTriagePage(b *testing.B) {
	pool := dbtest.Pool(b)
	store := db.New(pool, nil)
	srv := New(Config{Store: store, Pool: pool, Password: credential.TestParams})
	h := srv.Handler()
	hash, err := credential.Hash(testPassword, credential.TestParams)
	if err != nil {
		b.Fatal(err)
	}
	var owners []int64
	for _, name := range []string{"Ada", "Bo", "Cy", "Di", "Ed"} {
		u, err := store.CreateUser(context.Background(), cohort.System,
			db.NewUser{Email: strings.ToLower(name) + "@example.org", Name: "Coordinator " + name, Role: cohort.Coordinator, PasswordHash: hash})
		if err != nil {
			b.Fatal(err)
		}
		owners = append(owners, u.ID)
	}
	seedTriageScale(b, store, owners)

	signin := httptest.NewRequest("POST", "/signin", strings.NewReader(url.Values{"email": {"ada@example.org"}, "password": {testPassword}}.Encode()))
	signin.Header.Set("Content-Type", "application/x-www-form-urlencoded")
	rec := httptest.NewRecorder()
	h.ServeHTTP(rec, signin)
	if rec.Code != http.StatusSeeOther {
		b.Fatalf("sign in: status %d", rec.Code)
	}
	cookies := rec.Result().Cookies()
	get := func(path string) (int, int) {
		req := httptest.NewRequest("GET", path, nil)
		for _, c := range cookies {
			req.AddCookie(c)
		}
		rec := httptest.NewRecorder()
		h.ServeHTTP(rec, req)
		return rec.Code, rec.Body.Len()
	}
	if code, n := get("/triage"); code != 200 || n == 0 {
		b.Fatalf("triage: status %d, %d bytes", code, n)
	}
	var open int
	pool.QueryRow(context.Background(), `SELECT count(*) FROM cases WHERE closed_at IS NULL`).Scan(&open)
	if open != 2000 {
		b.Fatalf("%d working cases, want 2000", open)
	}

	var triage, home []time.Duration
	timed := func(path string, into *[]time.Duration) {
		start := time.Now()
		if code, _ := get(path); code != 200 {
			b.Fatalf("%s: status %d", path, code)
		}
		*into = append(*into, time.Since(start))
	}
	b.ResetTimer()
	for b.Loop() {
		timed("/triage", &triage)
		b.StopTimer()
		timed("/", &home)
		b.StartTimer()
	}
	b.StopTimer()
	at := func(samples []time.Duration, q float64) float64 {
		slices.Sort(samples)
		i := int(q * float64(len(samples)-1))
		return float64(samples[i].Microseconds()) / 1000
	}
	b.ReportMetric(at(triage, 0.50), "p50-ms")
	b.ReportMetric(at(triage, 0.95), "p95-ms")
	b.ReportMetric(at(home, 0.50), "home-p50-ms")
	b.ReportMetric(at(home, 0.95), "home-p95-ms")
	b.ReportMetric(at(triage, 0.50)/at(home, 0.50), "x-home-p50")
	_, size := get("/triage")
	b.ReportMetric(float64(size), "page-bytes")
}
