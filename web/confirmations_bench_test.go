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

// BenchmarkStatisticsPage measures the server time of the agreement
// statistics page (figures read and computed from every case, recording and
// reading, charts built, page rendered) at the triage benchmark's scale:
// 20,000 participants, 3,000 cases, 200 recordings, 100 readings. As a
// baseline measured in the same run, requests interleaved, it reports the
// start page, and the ratio of the medians.
//
//	go test -run '^$' -bench BenchmarkStatisticsPage -benchtime 100x ./web/
func BenchmarkStatisticsPage(b *testing.B) {
	pool := dbtest.Pool(b)
	store := db.New(pool, nil)
	h := New(Config{Store: store, Pool: pool, Password: credential.TestParams}).Handler()
	hash, err := credential.Hash(testPassword, credential.TestParams)
	if err != nil {
		b.Fatal(err)
	}
	u, err := store.CreateUser(context.Background(), cohort.System, db.NewUser{Email: "inv@example.org", Name: "Investigator", Role: cohort.Investigator, PasswordHash: hash})
	if err != nil {
		b.Fatal(err)
	}
	seedTriageScale(b, store, []int64{u.ID})
	signin := httptest.NewRequest("POST", "/signin", strings.NewReader(url.Values{"email": {"inv@example.org"}, "password": {testPassword}}.Encode()))
	signin.Header.Set("Content-Type", "application/x-www-form-urlencoded")
	rec := httptest.NewRecorder()
	h.ServeHTTP(rec, signin)
	if rec.Code != http.StatusSeeOther {
		b.Fatalf("sign in: status %d", rec.Code)
	}
	cookies := rec.Result().Cookies()
	timed := func(path string, into *[]time.Duration) {
		req := httptest.NewRequest("GET", path, nil)
		for _, c := range cookies {
			req.AddCookie(c)
		}
		rec := httptest.NewRecorder()
		start := time.Now()
		h.ServeHTTP(rec, req)
		*into = append(*into, time.Since(start))
		if rec.Code != http.StatusOK {
			b.Fatalf("%s: status %d", path, rec.Code)
		}
	}
	var page, home []time.Duration
	b.ResetTimer()
	for b.Loop() {
		timed("/confirmations/statistics", &page)
		b.StopTimer()
		timed("/", &home)
		b.StartTimer()
	}
	b.StopTimer()
	median := func(s []time.Duration) float64 {
		slices.Sort(s)
		return float64(s[len(s)/2].Microseconds()) / 1000
	}
	b.ReportMetric(median(page), "p50-ms")
	b.ReportMetric(median(home), "home-p50-ms")
	b.ReportMetric(median(page)/median(home), "x-home-p50")
}
