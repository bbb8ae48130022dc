package web

import (
	"context"
	"fmt"
	"io"
	"log/slog"
	"net/http"
	"net/http/httptest"
	"net/netip"
	"net/url"
	"regexp"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/credential"
	"cohortdesk/db"
	"cohortdesk/db/dbtest"
)

// TestReadsFromAStandbyThatGoesAwayAndComesBack runs the app on a primary
// and a hot standby started from it (db/pgcluster, streaming replication)
// with pages that only read sent to the standby, as DATABASE_READ_URL does,
// and signed-in people requesting pages all the while. The standby replays
// the primary's changes a second late (recovery_min_apply_delay), within the
// allowed lag, so it serves reads while visibly behind. Then:
//
//   - a coordinator's note is on the page they are sent to at once (their
//     reads go to the primary until the standby has replayed their change);
//   - the standby is stopped in the middle of the load: no page fails, the
//     reads fall back to the primary (log lines, metric counts);
//   - it is started again: reads return to it (log line, metric counts).
func TestReadsFromAStandbyThatGoesAwayAndComesBack(t *testing.T) {
	ctx := context.Background()
	pair := dbtest.StartReplicated(t, 5631, map[string]string{"recovery_min_apply_delay": "1s"})
	pool := pair.Pool
	store := db.New(pool, nil)
	a := &app{t: t, store: store, users: map[cohort.Role]db.User{}}
	hash, err := credential.Hash(testPassword, credential.TestParams)
	if err != nil {
		t.Fatal(err)
	}
	for _, r := range cohort.Roles {
		u, err := store.CreateUser(ctx, cohort.System, db.NewUser{Email: string(r) + "@example.org", Name: "Test " + r.Label(), Role: r, PasswordHash: hash})
		if err != nil {
			t.Fatal(err)
		}
		a.users[r] = u
	}
	loadDemo(t, a, 80)
	var caseID, participantID int64
	if err := pool.QueryRow(ctx, `SELECT id, participant_id FROM cases ORDER BY closed_at IS NULL DESC, id LIMIT 1`).Scan(&caseID, &participantID); err != nil {
		t.Fatal(err)
	}

	spool := pair.StandbyPool
	var logs dbtest.LogBuffer
	log := slog.New(slog.NewTextHandler(&logs, nil))
	mctx, stopMonitor := context.WithCancel(ctx)
	defer stopMonitor()
	sb := store.UseStandby(mctx, spool, db.StandbyOptions{MaxLag: 3 * time.Second, Every: 50 * time.Millisecond, Log: log})
	waitFor := func(what string, ok func() bool) {
		t.Helper()
		for deadline := time.Now().Add(60 * time.Second); !ok(); time.Sleep(20 * time.Millisecond) {
			if time.Now().After(deadline) {
				t.Fatalf("waited a minute for %s; log:\n%s", what, logs.String())
			}
		}
	}
	waitFor("the standby to be used", sb.Up)

	srv := New(Config{Store: store, Pool: pool, StandbyPool: spool, Logger: log, Password: credential.TestParams,
		Secret: []byte(testSecret), MetricsAllow: []netip.Prefix{netip.MustParsePrefix("127.0.0.1/32")}})
	a.ts, a.srv = httptest.NewServer(srv.Handler()), srv
	defer a.ts.Close()

	// The load: signed-in people requesting the pages that only read.
	pages := []string{"/", "/triage", "/participants", "/cases", "/progress", "/confirmations/statistics",
		fmt.Sprintf("/participants/%d", participantID), fmt.Sprintf("/cases/%d", caseID)}
	var served, failed atomic.Int64
	var failures sync.Map
	stop := make(chan struct{})
	var wg sync.WaitGroup
	for i := range 6 {
		c := a.signIn([]cohort.Role{cohort.Coordinator, cohort.Investigator, cohort.Admin}[i%3])
		wg.Go(func() {
			for k := i; ; k++ {
				select {
				case <-stop:
					return
				default:
				}
				p := pages[k%len(pages)]
				res, err := c.Get(a.ts.URL + p)
				if err != nil {
					failed.Add(1)
					failures.Store(p, err.Error())
					continue
				}
				io.Copy(io.Discard, res.Body)
				res.Body.Close()
				if res.StatusCode != http.StatusOK {
					failed.Add(1)
					failures.Store(p, res.Status)
					continue
				}
				served.Add(1)
			}
		})
	}
	finish := func() {
		close(stop)
		wg.Wait()
	}
	reads := func() int64 { return sb.Reads.Load() }
	waitFor("pages read from the standby", func() bool { return reads() > 50 })

	// A coordinator's change is on their next page at once, though the
	// standby replays it a second later.
	coord := a.signIn(cohort.Coordinator)
	note := "Called back at 09:40, recorder arrives Friday " + strconv.FormatInt(time.Now().UnixNano(), 36)
	res := a.postForm(coord, fmt.Sprintf("/participants/%d/notes", participantID), url.Values{"body": {note}})
	if res.StatusCode != http.StatusSeeOther {
		t.Fatalf("note: status %d", res.StatusCode)
	}
	own := sb.FallbackCount(db.FallbackOwn)
	_, body := a.get(coord, fmt.Sprintf("/participants/%d", participantID))
	if !strings.Contains(body, note) {
		t.Error("the coordinator's own note is not on their next page")
	}
	if sb.FallbackCount(db.FallbackOwn) == own {
		t.Error("the coordinator's page after their change was not read from the primary")
	}
	// Someone else reading the standby sees it once it is replayed.
	other := a.signIn(cohort.Investigator)
	waitFor("the note on the standby", func() bool {
		_, body := a.get(other, fmt.Sprintf("/participants/%d", participantID))
		return strings.Contains(body, note)
	})

	// The standby goes away in the middle of the load.
	before := reads()
	pair.StopStandby(t)
	gone := func() int64 { return sb.FallbackCount(db.FallbackDown) + sb.FallbackCount(db.FallbackError) }
	waitFor("reads falling back to the primary", func() bool { return gone() > 20 && !sb.Up() })
	servedDown := served.Load()
	waitFor("pages served while the standby is down", func() bool { return served.Load() > servedDown+20 })
	if !strings.Contains(logs.String(), "reads fall back to the primary") {
		t.Errorf("no log line says reads fell back:\n%s", logs.String())
	}

	// It comes back.
	pair.StartStandby(t)
	waitFor("the standby to be used again", sb.Up)
	back := reads()
	waitFor("pages read from the standby again", func() bool { return reads() > back+50 })
	finish()
	if !strings.Contains(logs.String(), "reads go to the standby again") {
		t.Errorf("no log line says reads returned to the standby:\n%s", logs.String())
	}
	t.Logf("standby reads: %d before it stopped, %d when it came back, %d at the end", before, back, reads())
	if n := failed.Load(); n > 0 {
		failures.Range(func(k, v any) bool { t.Errorf("%s: %v", k, v); return true })
		t.Errorf("%d of %d pages failed", n, n+served.Load())
	}

	// The metrics count both ways.
	_, metrics := a.get(a.client(), "/metrics")
	for _, re := range []string{
		`cohortdesk_standby_reads_total [1-9]`,
		`cohortdesk_standby_fallbacks_total\{reason="(down|error)"\} [1-9]`,
		`cohortdesk_standby_fallbacks_total\{reason="own_write"\} [1-9]`,
		`cohortdesk_standby_up 1`,
		`cohortdesk_db_pool_connections\{pool="standby",state="idle"\}`,
	} {
		if !regexp.MustCompile(re).MatchString(metrics) {
			t.Errorf("metrics lack %s", re)
		}
	}
	t.Logf("%d pages served, %d standby reads, fallbacks: down %d, error %d, lag %d, own write %d",
		served.Load(), reads(), sb.FallbackCount(db.FallbackDown), sb.FallbackCount(db.FallbackError),
		sb.FallbackCount(db.FallbackLag), sb.FallbackCount(db.FallbackOwn))
}
