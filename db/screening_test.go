package db_test

import (
	"context"
	"encoding/json"
	"errors"
	"slices"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/screen"
	"cohortdesk/db"
	"cohortdesk/db/dbtest"
)

// enrolDay is the enrolment day of the synthetic participants; their weeks lie
// well before fixedNow, so no reading is dropped as future.
var enrolDay = cohort.Date{Year: 2026, Month: 3, Day: 2}

// addWeek stores hours of synthetic readings every 10 s at the start of a week.
func addWeek(t *testing.T, s *db.Store, pid int64, week int, r dbtest.Rhythm, hours int) {
	t.Helper()
	hr := dbtest.SynthHR(uint64(pid*100+int64(week)), r, dbtest.WeekStart(enrolDay, week), hours, 10*time.Second)
	dbtest.PutWearWeek(t, s.Pool(), pid, week, cohort.HeartRate, hr)
}

// addParticipantWithWeek enrols a participant with 48 hours of week 1.
func addParticipantWithWeek(t *testing.T, s *db.Store, studyID string, irregular bool) int64 {
	t.Helper()
	pid := dbtest.AddParticipant(t, s.Pool(), studyID, enrolDay)
	r := dbtest.Steady
	if irregular {
		r = dbtest.Irregular
	}
	addWeek(t, s, pid, 1, r, 48)
	return pid
}

// hookCalls records the after-screen hook's calls.
type hookCalls struct {
	mu    sync.Mutex
	calls []string
}

func (h *hookCalls) hook(ctx context.Context, protocolID int, ids []int64) error {
	h.mu.Lock()
	defer h.mu.Unlock()
	ids = slices.Clone(ids)
	slices.Sort(ids)
	b, _ := json.Marshal(map[string]any{"protocol": protocolID, "ids": ids})
	h.calls = append(h.calls, string(b))
	return nil
}

type storedRow struct {
	pid             int64
	week            int16
	verdict, result string
	digest          string
}

func storedResults(t *testing.T, s *db.Store, protocolID int) []storedRow {
	t.Helper()
	rows, err := s.Pool().Query(context.Background(), `SELECT participant_id, week, verdict, result::text, input_digest
		FROM screen_results WHERE protocol_id = $1 ORDER BY participant_id, week`, protocolID)
	if err != nil {
		t.Fatal(err)
	}
	defer rows.Close()
	var out []storedRow
	for rows.Next() {
		var r storedRow
		if err := rows.Scan(&r.pid, &r.week, &r.verdict, &r.result, &r.digest); err != nil {
			t.Fatal(err)
		}
		out = append(out, r)
	}
	return out
}

// screenStored screens a stored participant-week afresh under p, as a
// re-computation of a stored result does, and returns the result and its
// JSON.
func screenStored(t *testing.T, s *db.Store, pid int64, week int, p screen.Protocol) (screen.Result, []byte) {
	t.Helper()
	part, err := s.Participant(context.Background(), pid)
	if err != nil {
		t.Fatal(err)
	}
	wk, err := s.WearWeek(context.Background(), part, week)
	if err != nil {
		t.Fatal(err)
	}
	res, err := screen.Screen(&wk, p, fixedNow.UnixMilli(), nil)
	if err != nil {
		t.Fatal(err)
	}
	b, _ := json.Marshal(res)
	return res, b
}

func TestScreeningJobFlagsAndReproduces(t *testing.T) {
	s := newStore(t)
	ctx := context.Background()
	v1 := mustDefault(t, s)
	steady := dbtest.AddParticipant(t, s.Pool(), "P-STEADY", enrolDay)
	for w := range 3 {
		addWeek(t, s, steady, w, dbtest.Steady, 48)
	}
	irregular := dbtest.AddParticipant(t, s.Pool(), "P-IRREG", enrolDay)
	addWeek(t, s, irregular, 0, dbtest.Steady, 48)
	addWeek(t, s, irregular, 1, dbtest.Irregular, 48)
	short := dbtest.AddParticipant(t, s.Pool(), "P-SHORT", enrolDay)
	addWeek(t, s, short, 0, dbtest.Steady, 6) // 6 h < 24 h of usable wear

	var hc hookCalls
	sc := db.NewScreener(s, hc.hook)
	w := &db.Worker{Store: s, Handlers: sc.Handlers(), Poll: 10 * time.Millisecond}
	jobID, err := s.EnqueueScreen(ctx, nil, 0)
	if err != nil {
		t.Fatal(err)
	}
	if did, err := w.RunOne(ctx, 0); !did || err != nil {
		t.Fatalf("worker: did %v err %v", did, err)
	}
	j, err := s.Job(ctx, jobID)
	if err != nil {
		t.Fatal(err)
	}
	if j.State != db.JobDone || j.Done != 6 || j.Total != 6 || !strings.Contains(j.Outcome, "1 positive, 4 negative, 1 insufficient") {
		t.Fatalf("job %+v", j)
	}
	first := storedResults(t, s, v1.ID)
	want := map[[2]int64]string{
		{steady, 0}: "negative", {steady, 1}: "negative", {steady, 2}: "negative",
		{irregular, 0}: "negative", {irregular, 1}: "positive", {short, 0}: "insufficient",
	}
	if len(first) != len(want) {
		t.Fatalf("%d results, want %d", len(first), len(want))
	}
	digests := map[string]bool{}
	for _, r := range first {
		if got := want[[2]int64{r.pid, int64(r.week)}]; got != r.verdict {
			t.Errorf("participant %d week %d: %s, want %s", r.pid, r.week, r.verdict, got)
		}
		if len(r.digest) != 64 || digests[r.digest] {
			t.Errorf("participant %d week %d: digest %q missing or repeated", r.pid, r.week, r.digest)
		}
		digests[r.digest] = true
	}
	if want := `{"ids":[` + itoa(steady) + `,` + itoa(irregular) + `,` + itoa(short) + `],"protocol":` + itoa(int64(v1.ID)) + `}`; len(hc.calls) != 1 || hc.calls[0] != want {
		t.Fatalf("hook calls %v, want [%s]", hc.calls, want)
	}

	// The stored JSON is exactly what the screen computes from the stored week.
	_, b := screenStored(t, s, irregular, 1, v1.Params)
	for _, r := range first {
		if r.pid == irregular && r.week == 1 && r.result != string(b) {
			t.Fatalf("stored result differs from a fresh computation:\nstored %.300s\nfresh  %.300s", r.result, b)
		}
	}

	// A second run of the same version on the same data: byte for byte the same.
	if _, err := sc.ScreenNow(ctx, nil, v1.ID, nil); err != nil {
		t.Fatal(err)
	}
	again := storedResults(t, s, v1.ID)
	if !slices.Equal(first, again) {
		t.Fatal("re-running the version changed stored results or digests")
	}

	// A version that is not active stores results but opens no cases.
	v2 := newVersion(t, s, v1.ID, func(q *screen.Protocol) { q.Windows[0].MASDThreshold = 30; q.Windows[1].MASDThreshold = 30 })
	sum, err := sc.ScreenNow(ctx, []int64{irregular}, v2.ID, nil)
	if err != nil {
		t.Fatal(err)
	}
	if sum.Weeks != 2 || sum.Positive != 0 || len(hc.calls) != 2 {
		t.Fatalf("v2 run %+v, hook calls %d (want 2: the active re-run only)", sum, len(hc.calls))
	}
}

func TestScreeningWithPersonalBaseline(t *testing.T) {
	s := newStore(t)
	ctx := context.Background()
	v1 := mustDefault(t, s)
	v2 := newVersion(t, s, v1.ID, func(q *screen.Protocol) { q.Baseline.Enabled = true; q.Baseline.Weeks = 2 })
	pid := dbtest.AddParticipant(t, s.Pool(), "P-BASE", enrolDay)
	for w := range 4 {
		addWeek(t, s, pid, w, dbtest.Steady, 48)
	}
	if _, err := db.NewScreener(s, nil).ScreenNow(ctx, []int64{pid}, v2.ID, nil); err != nil {
		t.Fatal(err)
	}
	rs, err := s.ScreenResults(ctx, pid, v2.ID)
	if err != nil || len(rs) != 4 {
		t.Fatalf("%d results (err %v)", len(rs), err)
	}
	for _, r := range rs {
		want := "applied"
		if r.Week < 2 {
			want = "baseline_week"
		}
		if r.Result.Baseline == nil || r.Result.Baseline.Status != want {
			t.Errorf("week %d baseline use %+v, want %s", r.Week, r.Result.Baseline, want)
		}
	}
}

func TestScreenUnknownProtocolIsNotFound(t *testing.T) {
	s := newStore(t)
	if _, err := s.EnqueueScreen(context.Background(), nil, 0); !errors.Is(err, cohort.ErrNotFound) {
		t.Fatalf("enqueue without any protocol: %v, want not found", err)
	}
	mustDefault(t, s)
	if _, err := s.EnqueueScreen(context.Background(), nil, 4242); !errors.Is(err, cohort.ErrNotFound) {
		t.Fatalf("enqueue with an unknown protocol: %v, want not found", err)
	}
	if jobs, _ := s.Jobs(context.Background(), 10); len(jobs) != 0 {
		t.Fatalf("refused enqueues left %d jobs", len(jobs))
	}
}

func itoa(n int64) string { return strconv.FormatInt(n, 10) }
