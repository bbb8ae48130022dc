package db_test

import (
	"context"
	"errors"
	"strings"
	"sync"
	"testing"
	"time"

	"cohortdesk/db"
	"cohortdesk/db/dbtest"
)

// TestTwoInstancesRunEachJobOnce runs two workers on two separate pools (as two
// app instances would) over one queue and checks every job ran exactly once.
func TestTwoInstancesRunEachJobOnce(t *testing.T) {
	url := dbtest.URL(t)
	ctx := context.Background()
	var stores []*db.Store
	for range 2 {
		pool, err := db.Open(ctx, url, 4)
		if err != nil {
			t.Fatal(err)
		}
		t.Cleanup(pool.Close)
		stores = append(stores, db.New(pool, nil))
	}
	const jobs = 60
	for i := range jobs {
		if _, err := stores[i%2].Enqueue(ctx, db.NewJob{Kind: "count", Payload: map[string]int{"n": i}}); err != nil {
			t.Fatal(err)
		}
	}
	var mu sync.Mutex
	runs := map[int64][]string{}
	handler := func(name string) db.JobFunc {
		return func(ctx context.Context, j db.Job, progress func(int64, int64) error) (string, error) {
			mu.Lock()
			runs[j.ID] = append(runs[j.ID], name)
			mu.Unlock()
			time.Sleep(2 * time.Millisecond) // hold the job so the other worker must skip it
			return "counted", progress(1, 1)
		}
	}
	var wg sync.WaitGroup
	for i, s := range stores {
		name := []string{"instance-a", "instance-b"}[i]
		w := &db.Worker{Store: s, Name: name, Handlers: map[string]db.JobFunc{"count": handler(name)}}
		wg.Go(func() {
			for {
				did, err := w.RunOne(ctx, 0)
				if err != nil {
					t.Error(err)
					return
				}
				if !did {
					return
				}
			}
		})
	}
	wg.Wait()
	if len(runs) != jobs {
		t.Fatalf("%d jobs ran, want %d", len(runs), jobs)
	}
	per := map[string]int{}
	for id, by := range runs {
		if len(by) != 1 {
			t.Errorf("job %d ran %d times (%v)", id, len(by), by)
		}
		per[by[0]]++
	}
	// Both instances must have worked, or the test proved nothing about
	// concurrent claims.
	if per["instance-a"] == 0 || per["instance-b"] == 0 {
		t.Errorf("jobs per instance %v: the instances did not run side by side", per)
	}
	t.Logf("jobs per instance: %v", per)
	list, err := stores[0].Jobs(ctx, 100)
	if err != nil {
		t.Fatal(err)
	}
	for _, j := range list {
		if j.State != db.JobDone || j.Attempts != 1 || j.Outcome != "counted" || j.Done != 1 || j.Total != 1 {
			t.Errorf("job %d: %+v", j.ID, j)
		}
	}
}

// TestLeaseExpiryHandsTheJobToAnotherWorker simulates a worker that crashed
// while holding a job: once its lease has run out, another worker takes the
// job, and the first can no longer finish or renew it.
func TestLeaseExpiryHandsTheJobToAnotherWorker(t *testing.T) {
	s := newStore(t)
	ctx := context.Background()
	id, err := s.Enqueue(ctx, db.NewJob{Kind: "k", MaxAttempts: 2})
	if err != nil {
		t.Fatal(err)
	}
	j, ok, err := s.ClaimJob(ctx, "crashed", time.Minute, nil, 0)
	if err != nil || !ok || j.ID != id || j.Attempts != 1 {
		t.Fatalf("first claim: %+v ok %v err %v", j, ok, err)
	}
	if _, ok, _ := s.ClaimJob(ctx, "other", time.Minute, nil, 0); ok {
		t.Fatal("a job under a live lease was claimed twice")
	}
	expire := func() {
		t.Helper()
		mustExec(t, s, `UPDATE jobs SET lease_until = clock_timestamp() - interval '1 second' WHERE id = $1`, id)
	}
	expire()
	j, ok, err = s.ClaimJob(ctx, "rescuer", time.Minute, nil, 0)
	if err != nil || !ok || j.ID != id || j.Attempts != 2 || !strings.Contains(j.Error, "crashed stopped renewing") {
		t.Fatalf("claim after expiry: %+v ok %v err %v", j, ok, err)
	}
	if err := s.CompleteJob(ctx, id, "crashed", "late"); !errors.Is(err, db.ErrJobLost) {
		t.Fatalf("the crashed worker completed a job it lost: %v", err)
	}
	if err := s.RenewJob(ctx, id, "crashed", time.Minute); !errors.Is(err, db.ErrJobLost) {
		t.Fatalf("the crashed worker renewed a job it lost: %v", err)
	}
	// The rescuer crashes too, on the last attempt: the job fails for good.
	expire()
	if _, ok, err := s.ClaimJob(ctx, "third", time.Minute, nil, 0); ok || err != nil {
		t.Fatalf("a job out of attempts was claimed again (err %v)", err)
	}
	got, _ := s.Job(ctx, id)
	if got.State != db.JobFailed || !strings.Contains(got.Error, "no attempts left") || got.FinishedAt == nil {
		t.Fatalf("job after its last lease ran out: %+v", got)
	}
}

// TestHeartbeatKeepsTheLease: a job that runs longer than its lease is not
// taken over while its worker renews it.
func TestHeartbeatKeepsTheLease(t *testing.T) {
	s := newStore(t)
	ctx := context.Background()
	id, _ := s.Enqueue(ctx, db.NewJob{Kind: "slow"})
	started := make(chan struct{})
	release := make(chan struct{})
	w := &db.Worker{Store: s, Lease: 300 * time.Millisecond, Handlers: map[string]db.JobFunc{"slow": func(ctx context.Context, j db.Job, _ func(int64, int64) error) (string, error) {
		close(started)
		<-release
		return "ok", nil
	}}}
	done := make(chan error, 1)
	go func() { _, err := w.RunOne(ctx, 0); done <- err }()
	<-started
	// Several lease lengths pass; a rival keeps trying to claim.
	deadline := time.Now().Add(time.Second)
	for time.Now().Before(deadline) {
		if _, ok, err := s.ClaimJob(ctx, "rival", time.Minute, nil, 0); ok || err != nil {
			t.Fatalf("rival claimed a job whose worker renews its lease (err %v)", err)
		}
		time.Sleep(50 * time.Millisecond)
	}
	close(release)
	if err := <-done; err != nil {
		t.Fatal(err)
	}
	if j, _ := s.Job(ctx, id); j.State != db.JobDone || j.Attempts != 1 {
		t.Fatalf("job %+v", j)
	}
}

func TestRetriesPermanentFailuresAndPanics(t *testing.T) {
	s := newStore(t)
	ctx := context.Background()
	tries := 0
	w := &db.Worker{Store: s, Backoff: func(int) time.Duration { return 0 }, Handlers: map[string]db.JobFunc{
		"flaky": func(context.Context, db.Job, func(int64, int64) error) (string, error) {
			tries++
			if tries == 1 {
				return "", errors.New("database went away")
			}
			return "fine", nil
		},
		"hopeless": func(context.Context, db.Job, func(int64, int64) error) (string, error) {
			return "", db.Permanent(errors.New("protocol 9 does not exist"))
		},
		"always": func(context.Context, db.Job, func(int64, int64) error) (string, error) {
			return "", errors.New("still broken")
		},
		"panics": func(context.Context, db.Job, func(int64, int64) error) (string, error) {
			var m map[string]int
			m["x"]++
			return "", nil
		},
	}}
	ids := map[string]int64{}
	for _, k := range []string{"flaky", "hopeless", "always", "panics"} {
		id, err := s.Enqueue(ctx, db.NewJob{Kind: k, MaxAttempts: 2})
		if err != nil {
			t.Fatal(err)
		}
		ids[k] = id
	}
	for range 20 {
		did, err := w.RunOne(ctx, 0)
		if err != nil {
			t.Fatal(err)
		}
		if !did {
			break
		}
	}
	for _, c := range []struct {
		kind, state, errPart string
		attempts             int
	}{
		{"flaky", db.JobDone, "attempt 1 of 2: database went away", 2},
		{"hopeless", db.JobFailed, "attempt 1 of 2: protocol 9 does not exist", 1},
		{"always", db.JobFailed, "attempt 2 of 2: still broken", 2},
		{"panics", db.JobFailed, "internal error", 2},
	} {
		j, err := s.Job(ctx, ids[c.kind])
		if err != nil {
			t.Fatal(err)
		}
		if j.State != c.state || j.Attempts != c.attempts || !strings.Contains(j.Error, c.errPart) {
			t.Errorf("%s: state %s attempts %d error %q; want %s, %d, %q", c.kind, j.State, j.Attempts, j.Error, c.state, c.attempts, c.errPart)
		}
	}
}

// TestWorkerStopsCleanlyOnCancel: a job in progress at shutdown goes back to
// the queue without losing an attempt, and Run returns.
func TestWorkerStopsCleanlyOnCancel(t *testing.T) {
	s := newStore(t)
	ctx, cancel := context.WithCancel(context.Background())
	id, _ := s.Enqueue(context.Background(), db.NewJob{Kind: "long"})
	started := make(chan struct{})
	w := &db.Worker{Store: s, Poll: 10 * time.Millisecond, Handlers: map[string]db.JobFunc{"long": func(ctx context.Context, j db.Job, _ func(int64, int64) error) (string, error) {
		close(started)
		<-ctx.Done()
		return "", ctx.Err()
	}}}
	done := make(chan error, 1)
	go func() { done <- w.Run(ctx) }()
	<-started
	cancel()
	select {
	case err := <-done:
		if err != nil {
			t.Fatal(err)
		}
	case <-time.After(10 * time.Second):
		t.Fatal("worker did not stop")
	}
	j, _ := s.Job(context.Background(), id)
	if j.State != db.JobQueued || j.Attempts != 0 || j.LockedBy != "" {
		t.Fatalf("job after shutdown: %+v", j)
	}
}

// TestLaterDefersWithoutCountingTheAttempt: a job that asks to run later
// goes back to the queue at the time it named, its attempt not counted,
// its reason kept; it is not claimed before then.
func TestLaterDefersWithoutCountingTheAttempt(t *testing.T) {
	s := db.New(dbtest.Pool(t), nil)
	ctx := context.Background()
	id, err := s.Enqueue(ctx, db.NewJob{Kind: "wait", MaxAttempts: 1})
	if err != nil {
		t.Fatal(err)
	}
	var runs int
	at := time.Now().Add(time.Hour)
	w := &db.Worker{Store: s, Handlers: map[string]db.JobFunc{"wait": func(context.Context, db.Job, func(int64, int64) error) (string, error) {
		runs++
		return "", db.Later(at, "held until the quiet hours end")
	}}}
	for range 2 {
		if _, err := w.RunOne(ctx, 0); err != nil {
			t.Fatal(err)
		}
	}
	j, err := s.Job(ctx, id)
	if err != nil {
		t.Fatal(err)
	}
	if runs != 1 || j.State != db.JobQueued || j.Attempts != 0 || j.Error != "held until the quiet hours end" || j.RunAfter.Sub(at).Abs() > time.Millisecond {
		t.Fatalf("after Later: runs %d, %s, attempts %d, %q, run after %v (want %v)", runs, j.State, j.Attempts, j.Error, j.RunAfter, at)
	}
}
