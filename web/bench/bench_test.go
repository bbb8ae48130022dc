package bench

import (
	"bytes"
	"context"
	"encoding/json"
	"flag"
	"strings"
	"testing"
	"time"

	"cohortdesk/db/dbtest"
)

func TestMain(m *testing.M) { dbtest.Main(m) }

// loadDuration is how long TestPagesUnderLoad runs its 200 clients. Short by
// default to keep the suite quick; the full run of the load requirement is
//
//	go test ./web/bench -run TestPagesUnderLoad -v -load-duration 60s
var loadDuration = flag.Duration("load-duration", 3*time.Second, "duration of the 200-client page load in TestPagesUnderLoad")

// TestRunSmall runs every part at a small scale and checks that the report
// holds what the table and the JSON promise: both figures of each
// comparison, agreement of the two MASD computations, every page served
// without a server error and measured against its store calls.
func TestRunSmall(t *testing.T) {
	var progress bytes.Buffer
	url := dbtest.OwnerURL(t) // the bench builds its own comparison tables
	rep, err := Run(context.Background(), url, Options{Participants: 400, Weeks: 3, WearParticipants: 6,
		Import: true, Screen: true, Pages: true, Clients: []int{1, 4}, Duration: time.Second, Dir: t.TempDir(), Progress: &progress})
	if err != nil {
		t.Fatalf("%v\n%s", err, progress.String())
	}
	if rep.Scale.Participants != 400 || rep.Scale.WearWeeks != 18 || rep.Scale.Readings == 0 || rep.Scale.SparseWeeks == 0 || rep.Scale.Cases == 0 || rep.Scale.WorkingCases == 0 {
		t.Errorf("scale: %+v", rep.Scale)
	}
	im := rep.Import
	if im == nil || im.Readings != rep.Scale.Readings || im.Ours.ReadingsPerSecond <= 0 || im.Copy.ReadingsPerSecond <= 0 || im.OursBytesPerReading <= 0 || im.CopyBytesPerReading <= 0 {
		t.Errorf("import: %+v", im)
	}
	sc := rep.Screen
	if sc == nil || sc.Weeks != 18 || sc.MASDOurs.ReadingsPerSecond <= 0 || sc.MASDSQL.ReadingsPerSecond <= 0 || sc.MaxRelDiff > 1e-9 ||
		sc.Positive+sc.Negative+sc.Insufficient != 18 {
		t.Errorf("screen: %+v", sc)
	}
	if len(rep.Pages) != 2 || rep.Pages[0].Clients != 1 || rep.Pages[1].Clients != 4 {
		t.Fatalf("page loads: %+v", rep.Pages)
	}
	if rep.Figures <= 0 {
		t.Errorf("kept figures built in %v s", rep.Figures)
	}
	for _, pg := range rep.Pages {
		if pg.ServerErrors != 0 || pg.OtherStatus != 0 || pg.TransportErrors != 0 || len(pg.Pages) != len(PageNames) || pg.PerCPU <= 0 {
			t.Fatalf("pages: %+v", pg)
		}
		for _, p := range pg.Pages {
			// Every page reads the session and the signed-in user at least.
			if p.Requests == 0 || p.Server.N != int(p.Requests) || p.DB.N != int(p.Requests) || p.Calls < 2 || p.Server.P99 <= 0 || p.DB.P50 <= 0 {
				t.Errorf("page %s: %+v", p.Name, p)
			}
		}
	}
	var table bytes.Buffer
	if err := rep.WriteTable(&table); err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{"cohortdesk importer", "pgx COPY", "SQL lag()", "/participants/{id}", "/cases/{id}", "/confirmations/statistics", "store calls", "per CPU"} {
		if !strings.Contains(table.String(), want) {
			t.Errorf("the table lacks %q:\n%s", want, table.String())
		}
	}
	if _, err := json.Marshal(rep); err != nil {
		t.Fatal(err)
	}
	t.Logf("\n%s", table.String())
	// A database that holds a study is never used again.
	if _, err := Run(context.Background(), url, Options{Participants: 400}); err == nil || !strings.Contains(err.Error(), "already holds") {
		t.Errorf("a second run on the same database: %v, want a refusal", err)
	}
}

// TestPagesUnderLoad is the load requirement: 200 concurrent signed-in
// clients request the main pages over loopback; no request may fail on the
// server's side (5xx), lose its session or go unanswered. It reports p99 per
// page; latency is measured, not asserted.
func TestPagesUnderLoad(t *testing.T) {
	var progress bytes.Buffer
	rep, err := Run(context.Background(), dbtest.OwnerURL(t), Options{Participants: 2000, Weeks: 4, WearParticipants: 10,
		Pages: true, Clients: []int{200}, Duration: *loadDuration, Dir: t.TempDir(), Progress: &progress})
	if err != nil {
		t.Fatalf("%v\n%s", err, progress.String())
	}
	pg := rep.Pages[0]
	if pg.Requests == 0 || pg.ServerErrors != 0 || pg.OtherStatus != 0 || pg.TransportErrors != 0 {
		t.Errorf("%d requests: %d server errors, %d other answers, %d without an answer", pg.Requests, pg.ServerErrors, pg.OtherStatus, pg.TransportErrors)
	}
	for _, p := range pg.Pages {
		if p.Requests == 0 {
			t.Errorf("page %s was never served", p.Path)
		}
		t.Logf("%-20s %6d requests, server p50 %.1f ms, p99 %.1f ms (client p99 %.1f ms)", p.Path, p.Requests, p.Server.P50, p.Server.P99, p.Client.P99)
	}
	t.Logf("200 clients for %.0f s: %d requests (%.0f/s), %d server errors", pg.Seconds, pg.Requests, pg.RequestsPerSecond, pg.ServerErrors)
}
