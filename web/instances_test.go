package web

import (
	"context"
	"fmt"
	"net/http"
	"net/http/httptest"
	"strings"
	"sync"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/credential"
	"cohortdesk/db"
	"cohortdesk/db/dbtest"
)

// instance is one app instance: its own pool, store, server and workers, as a
// separate process behind a load balancer would have.
type instance struct {
	name  string
	store *db.Store
	ts    *httptest.Server
}

func newInstance(t *testing.T, name, url string) *instance {
	t.Helper()
	pool, err := db.Open(context.Background(), url, 6)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(pool.Close)
	store := db.New(pool, nil)
	srv := New(Config{Store: store, Pool: pool, Password: credential.TestParams})
	ts := httptest.NewServer(srv.Handler())
	t.Cleanup(ts.Close)
	return &instance{name: name, store: store, ts: ts}
}

// TestTwoInstancesShareSessionsAndJobs runs two app instances on one
// database. A session made on one is valid on the other, and signing out on
// one ends it on both. Background jobs queued by imports made through either
// instance, and more queued directly, are worked by two workers in each
// instance at once: every job runs exactly once (its handler is called once,
// one attempt, done), and every imported participant-week gets its screening
// result.
func TestTwoInstancesShareSessionsAndJobs(t *testing.T) {
	url := dbtest.URL(t)
	a, b := newInstance(t, "A", url), newInstance(t, "B", url)
	ctx := context.Background()
	hash, err := credential.Hash(testPassword, credential.TestParams)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := a.store.CreateUser(ctx, cohort.System, db.NewUser{Email: "coordinator@example.org", Name: "Test Coordinator", Role: cohort.Coordinator, PasswordHash: hash}); err != nil {
		t.Fatal(err)
	}
	if _, err := a.store.EnsureDefaultProtocol(ctx); err != nil {
		t.Fatal(err)
	}

	// Sessions: sign in on A, use the same cookie on B.
	ha := &app{t: t, ts: a.ts, store: a.store}
	c := ha.signIn(cohort.Coordinator)
	get := func(in *instance, path string) (int, string) {
		t.Helper()
		hb := &app{t: t, ts: in.ts, store: in.store}
		res, body := hb.get(c, path)
		return res.StatusCode, body
	}
	// The cookie jar keys cookies by host, and both test servers listen on
	// 127.0.0.1: the cookie from A goes to B, as it would behind one address.
	if code, body := get(b, "/"); code != http.StatusOK || !strings.Contains(body, "Test Coordinator") {
		t.Fatalf("B with A's session: status %d", code)
	}

	// Jobs: each instance runs two workers over the same queue, counting the
	// calls of its handlers per job.
	var mu sync.Mutex
	calls := map[int64][]string{}
	wctx, stop := context.WithCancel(ctx)
	var wg sync.WaitGroup
	for _, in := range []*instance{a, b} {
		handlers := db.NewScreener(in.store, db.CaseSync(in.store)).Handlers()
		screen := handlers[db.JobScreen]
		handlers[db.JobScreen] = func(ctx context.Context, j db.Job, progress func(done, total int64) error) (string, error) {
			mu.Lock()
			calls[j.ID] = append(calls[j.ID], in.name)
			mu.Unlock()
			return screen(ctx, j, progress)
		}
		for k := range 2 {
			w := &db.Worker{Store: in.store, Name: fmt.Sprintf("%s/%d", in.name, k), Handlers: handlers, Poll: 20 * time.Millisecond}
			wg.Go(func() { _ = w.Run(wctx) })
		}
	}
	defer func() { stop(); wg.Wait() }()

	// Six imports, alternating between the instances, each for its own
	// participant: each queues one screening job in its transaction.
	enrolled := cohort.DateOf(time.Now().UTC().AddDate(0, 0, -21))
	const files = 6
	for i := range files {
		dbtest.AddParticipant(t, a.store.Pool(), fmt.Sprintf("TW-%d", i), enrolled)
	}
	for i := range files {
		in := []*instance{a, b}[i%2]
		hi := &app{t: t, ts: in.ts, store: in.store}
		body := "study_id,time,kind,value\n"
		for k := 0; k < 2000; k++ {
			at := dbtest.WeekStart(enrolled, 0).Add(time.Duration(k) * 5 * time.Minute)
			body += fmt.Sprintf("TW-%d,%s,heart_rate,%d\n", i, at.Format(time.RFC3339), 60+(k*7)%13)
		}
		if res := uploadCSV(t, hi, c, body); res.StatusCode != http.StatusSeeOther {
			t.Fatalf("import %d through %s: status %d", i, in.name, res.StatusCode)
		}
	}
	// Twenty more, queued directly.
	for range 20 {
		if _, err := a.store.EnqueueScreen(ctx, nil, 0); err != nil {
			t.Fatal(err)
		}
	}

	var done, total int
	for i := 0; i < 600; i++ { // bounded: 60 s
		if err := a.store.Pool().QueryRow(ctx, `SELECT count(*) FILTER (WHERE state = 'done'), count(*) FROM jobs`).Scan(&done, &total); err != nil {
			t.Fatal(err)
		}
		if done == total && total > 0 {
			break
		}
		time.Sleep(100 * time.Millisecond)
	}
	if total != files+20 || done != total {
		t.Fatalf("%d of %d jobs done, want all %d", done, total, files+20)
	}
	rows, err := a.store.Pool().Query(ctx, `SELECT id, attempts, locked_by FROM jobs ORDER BY id`)
	if err != nil {
		t.Fatal(err)
	}
	ran := map[string]int{}
	for rows.Next() {
		var id int64
		var attempts int
		var by string
		if err := rows.Scan(&id, &attempts, &by); err != nil {
			t.Fatal(err)
		}
		mu.Lock()
		got := calls[id]
		mu.Unlock()
		if attempts != 1 || len(got) != 1 || !strings.HasPrefix(by, got[0]+"/") {
			t.Errorf("job %d: %d attempts, handler calls %v, locked by %q; want exactly one run", id, attempts, got, by)
		}
		if len(got) > 0 {
			ran[got[0]]++
		}
	}
	t.Logf("jobs run per instance: %v", ran)
	var results, weeks int
	if err := a.store.Pool().QueryRow(ctx, `SELECT (SELECT count(*) FROM screen_results), (SELECT count(*) FROM (SELECT DISTINCT participant_id, week FROM wear_weeks) w)`).Scan(&results, &weeks); err != nil {
		t.Fatal(err)
	}
	if results != weeks || weeks == 0 {
		t.Errorf("%d screening results for %d participant-weeks with data", results, weeks)
	}

	// Signing out on B ends the session on A too.
	hb := &app{t: t, ts: b.ts, store: b.store}
	if res := hb.postForm(c, "/signout", nil); res.StatusCode != http.StatusSeeOther {
		t.Fatalf("sign out on B: status %d", res.StatusCode)
	}
	if code, _ := get(a, "/"); code != http.StatusSeeOther {
		t.Errorf("A after signing out on B: status %d, want a redirect to sign in", code)
	}
}
