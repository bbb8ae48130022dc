package web

import (
	"context"
	"net/http"
	"net/http/httptest"
	"net/netip"
	"strings"
	"testing"

	"cohortdesk/cohort"
	"cohortdesk/cohort/credential"
	"cohortdesk/db"
	"cohortdesk/db/dbtest"
)

// TestMetricsForAllowedAddressesOnly: /metrics answers in the Prometheus
// text format to an allowed address, with request durations labelled by
// route pattern (never by the address with its ids), the pool's use, round
// trips, the job queue and the throughput counters; the same server refuses
// an address that is not allowed, and a server without an allow list refuses
// everyone (TestRouteTableByRole).
func TestMetricsForAllowedAddressesOnly(t *testing.T) {
	pool := dbtest.Pool(t)
	store := db.New(pool, nil)
	ctx := context.Background()
	if _, err := store.EnsureDefaultProtocol(ctx); err != nil {
		t.Fatal(err)
	}
	if _, err := store.EnqueueScreen(ctx, nil, 0); err != nil {
		t.Fatal(err)
	}
	for _, allow := range []string{"127.0.0.1/32", "10.9.0.0/16"} {
		srv := New(Config{Store: store, Pool: pool, Password: credential.TestParams, Secret: []byte(testSecret),
			MetricsAllow: []netip.Prefix{netip.MustParsePrefix(allow)}})
		ts := httptest.NewServer(srv.Handler())
		a := &app{t: t, ts: ts, store: store, srv: srv, users: map[cohort.Role]db.User{}}
		res, _ := a.get(a.client(), "/participants/12345")
		res.Body.Close()
		res, body := a.get(a.client(), "/metrics")
		ts.Close()
		if allow != "127.0.0.1/32" {
			if res.StatusCode != http.StatusForbidden || strings.Contains(body, "cohortdesk_") {
				t.Errorf("not allowed: status %d, metrics shown %v", res.StatusCode, strings.Contains(body, "cohortdesk_"))
			}
			continue
		}
		if res.StatusCode != http.StatusOK || !strings.HasPrefix(res.Header.Get("Content-Type"), "text/plain") {
			t.Fatalf("allowed: status %d, type %q", res.StatusCode, res.Header.Get("Content-Type"))
		}
		for _, want := range []string{
			`cohortdesk_http_request_duration_seconds_count{method="GET",route="/participants/{id}",status="303"} 1`,
			`cohortdesk_db_pool_connections{pool="primary",state="idle"}`,
			`cohortdesk_db_pool_max_connections{pool="primary"}`,
			`cohortdesk_db_round_trips_total`,
			`cohortdesk_jobs{state="queued"} 1`,
			`cohortdesk_jobs_oldest_queued_seconds `,
			`cohortdesk_readings_imported_total`,
			`cohortdesk_weeks_screened_total`,
			`cohortdesk_figures_pending_participants 0`,
			`cohortdesk_scrape_errors{figure="jobs"} 0`,
		} {
			if !strings.Contains(body, want) {
				t.Errorf("metrics lack %s", want)
			}
		}
		if strings.Contains(body, "12345") {
			t.Error("a route label carries an id")
		}
	}
}
