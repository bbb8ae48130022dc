package db_test

import (
	"context"
	"errors"
	"fmt"
	"math"
	"testing"

	"cohortdesk/cohort"
	"cohortdesk/cohort/stats"
	"cohortdesk/db"
	"cohortdesk/db/dbtest"
)

// overRead files a case over one week of a participant with one recording read
// by the given (role, rhythm) pairs.
func overRead(t *testing.T, s *db.Store, protocolID int, pid int64, week int, reads ...[2]string) {
	t.Helper()
	ctx := context.Background()
	var caseID, recID int64
	if err := s.Pool().QueryRow(ctx, `INSERT INTO cases (participant_id, protocol_id, first_week, last_week, state, flagged_at)
		VALUES ($1, $2, $3, $3, 'over_read', $4) RETURNING id`, pid, protocolID, week, fixedNow).Scan(&caseID); err != nil {
		t.Fatal(err)
	}
	if err := s.Pool().QueryRow(ctx, `INSERT INTO recordings (case_id, participant_id, taken_at, duration_s) VALUES ($1, $2, $3, 30) RETURNING id`,
		caseID, pid, fixedNow).Scan(&recID); err != nil {
		t.Fatal(err)
	}
	for _, r := range reads {
		mustExec(t, s, `INSERT INTO over_reads (recording_id, case_id, participant_id, role, rhythm, reader, read_on) VALUES ($1, $2, $3, $4, $5, 'Reader', '2026-05-01')`,
			recID, caseID, pid, r[0], r[1])
	}
}

// alternating stores 48 h of readings every 10 s alternating lo and lo+step,
// so every 5-minute window has a MASD of exactly step (hand-worked: every
// successive difference is step).
func alternating(t *testing.T, s *db.Store, pid int64, week int, lo, step int32) {
	t.Helper()
	var hr cohort.Samples
	start := dbtest.WeekStart(enrolDay, week).UnixMilli()
	for i := int64(0); i < 48*360; i++ {
		hr.Append(start+i*10_000, lo+int32(i%2)*step)
	}
	dbtest.PutWearWeek(t, s.Pool(), pid, week, cohort.HeartRate, hr)
}

func TestSweepCountsFlagsPPVAndSensitivity(t *testing.T) {
	s := newStore(t)
	ctx := context.Background()
	v1 := mustDefault(t, s)
	pool := s.Pool()
	a := dbtest.AddParticipant(t, pool, "X-A", enrolDay) // irregular, over-read AF
	addWeek(t, s, a, 1, dbtest.Irregular, 48)
	overRead(t, s, v1.ID, a, 1, [2]string{"first", "af"})
	b := dbtest.AddParticipant(t, pool, "X-B", enrolDay) // MASD exactly 4, over-read sinus
	alternating(t, s, b, 1, 60, 4)
	overRead(t, s, v1.ID, b, 1, [2]string{"first", "sinus"}, [2]string{"second", "other"}, [2]string{"adjudication", "sinus"})
	c := dbtest.AddParticipant(t, pool, "X-C", enrolDay) // steady, yet over-read AF: a miss
	addWeek(t, s, c, 1, dbtest.Steady, 48)
	overRead(t, s, v1.ID, c, 1, [2]string{"first", "af"}, [2]string{"second", "af"})
	d := dbtest.AddParticipant(t, pool, "X-D", enrolDay) // steady, no ECG
	addWeek(t, s, d, 1, dbtest.Steady, 48)
	e := dbtest.AddParticipant(t, pool, "X-E", enrolDay) // unreadable recording
	addWeek(t, s, e, 1, dbtest.Steady, 48)
	overRead(t, s, v1.ID, e, 1, [2]string{"first", "uninterpretable"})
	f := dbtest.AddParticipant(t, pool, "X-F", enrolDay) // readers disagree, not adjudicated
	addWeek(t, s, f, 1, dbtest.Steady, 48)
	overRead(t, s, v1.ID, f, 1, [2]string{"first", "af"}, [2]string{"second", "sinus"})

	// 5-minute threshold 3: A and B flag. 8 (the default): only A. 30: A
	// still flags through its 30-minute windows (threshold 7).
	got, err := s.Sweep(ctx, v1.ID, "windows[0].masd_threshold", []float64{3, 8, 30})
	if err != nil {
		t.Fatal(err)
	}
	if got.Weeks != 6 || got.ConfirmedWeeks != 2 || got.NotAFWeeks != 1 || got.UninterpretableWeeks != 1 || got.PendingWeeks != 1 {
		t.Fatalf("sweep %+v", got)
	}
	want := []struct {
		flagged int
		table   stats.Table2x2
	}{
		{2, stats.Table2x2{TP: 1, FP: 1, FN: 1, TN: 0}},
		{1, stats.Table2x2{TP: 1, FP: 0, FN: 1, TN: 1}},
		{1, stats.Table2x2{TP: 1, FP: 0, FN: 1, TN: 1}},
	}
	for i, w := range want {
		r := got.Rows[i]
		if r.Flagged != w.flagged || r.Table != w.table {
			t.Errorf("value %v: flagged %d table %+v; want %d %+v", r.Value, r.Flagged, r.Table, w.flagged, w.table)
		}
	}
	r := got.Rows[0]
	if r.PPV != (stats.Fraction{X: 1, N: 2}) || r.Sensitivity != (stats.Fraction{X: 1, N: 2}) || r.PPVCI == nil {
		t.Fatalf("value 3: PPV %v sensitivity %v", r.PPV, r.Sensitivity)
	}
	// Wilson 95% interval of 1/2 (computed by hand from the score interval
	// of Newcombe 1998, method 3): with z = 1.959964, n = 2, p = 0.5,
	// (p + z^2/2n -+ z sqrt(p(1-p)/n + z^2/4n^2)) / (1 + z^2/n)
	// = (1.4604 -+ 1.1843) / 2.9207 = 0.0945 to 0.9055.
	if math.Abs(r.PPVCI.Lo-0.0945) > 5e-4 || math.Abs(r.PPVCI.Hi-0.9055) > 5e-4 {
		t.Fatalf("Wilson interval of 1/2: %+v", *r.PPVCI)
	}

	var ve *cohort.ValidationError
	for _, c := range []struct {
		param  string
		values []float64
	}{
		{"windows[0].masd_threshold", []float64{-1}},
		{"windows[7].masd_threshold", []float64{5}},
		{"windows[0].minutes", []float64{5}},
		{"windows[0].run_length", []float64{2.5}},
		{"min_wear_hours", nil},
	} {
		if _, err := s.Sweep(ctx, v1.ID, c.param, c.values); !errors.As(err, &ve) {
			t.Errorf("%s %v: err %v, want a validation error", c.param, c.values, err)
		}
	}
	if _, err := s.Sweep(ctx, 999, "min_wear_hours", []float64{1}); !errors.Is(err, cohort.ErrNotFound) {
		t.Errorf("unknown version: %v", err)
	}
}

// TestSweepRunsInTheBackground: a sweep asked for is recorded and
// queued; a worker computes it with progress and stores the result, which
// reads back equal to Sweep's own on the same data. A sweep that cannot
// run is refused before anything is queued.
func TestSweepRunsInTheBackground(t *testing.T) {
	s := newStore(t)
	ctx := context.Background()
	v1 := mustDefault(t, s)
	pool := s.Pool()
	a := dbtest.AddParticipant(t, pool, "X-A", enrolDay)
	addWeek(t, s, a, 1, dbtest.Irregular, 48)
	overRead(t, s, v1.ID, a, 1, [2]string{"first", "af"})
	b := dbtest.AddParticipant(t, pool, "X-B", enrolDay)
	addWeek(t, s, b, 0, dbtest.Steady, 48)
	addWeek(t, s, b, 1, dbtest.Steady, 48)
	actor := cohort.Actor{Name: "Inv", Role: cohort.Investigator}
	values := []float64{3, 8, 30}

	id, err := s.StartSweep(ctx, actor, v1.ID, "windows[0].masd_threshold", values)
	if err != nil {
		t.Fatal(err)
	}
	run, err := s.SweepRun(ctx, id)
	if err != nil || run.Result != nil || run.Job.State != db.JobQueued || run.Param != "windows[0].masd_threshold" || len(run.Values) != 3 {
		t.Fatalf("queued sweep %+v (err %v)", run, err)
	}
	w := &db.Worker{Store: s, Handlers: db.NewScreener(s, nil).Handlers()}
	if ok, err := w.RunOne(ctx, run.Job.ID); !ok || err != nil {
		t.Fatalf("run the job: %v %v", ok, err)
	}
	run, err = s.SweepRun(ctx, id)
	if err != nil || run.Result == nil || run.Job.State != db.JobDone || run.Job.Done != 3 || run.Job.Total != 3 {
		t.Fatalf("finished sweep: job %+v, result %v (err %v)", run.Job, run.Result != nil, err)
	}
	direct, err := s.Sweep(ctx, v1.ID, "windows[0].masd_threshold", values)
	if err != nil {
		t.Fatal(err)
	}
	if run.Result.Weeks != direct.Weeks || run.Result.ConfirmedWeeks != direct.ConfirmedWeeks || len(run.Result.Rows) != len(direct.Rows) {
		t.Fatalf("stored %+v, direct %+v", run.Result, direct)
	}
	for i, r := range run.Result.Rows {
		d := direct.Rows[i]
		if r.Value != d.Value || r.Flagged != d.Flagged || r.Table != d.Table || r.PPV != d.PPV || (r.PPVCI == nil) != (d.PPVCI == nil) {
			t.Errorf("value %v: stored %+v, direct %+v", r.Value, r, d)
		}
	}
	list, err := s.SweepRuns(ctx, 10)
	if err != nil || len(list) != 1 || list[0].ID != id {
		t.Fatalf("list %+v (err %v)", list, err)
	}
	var n int
	pool.QueryRow(ctx, `SELECT count(*) FROM audit_events WHERE action = 'sweep.start' AND object_id = $1`, fmt.Sprint(id)).Scan(&n)
	if n != 1 {
		t.Errorf("start audited %d times", n)
	}

	var ve *cohort.ValidationError
	if _, err := s.StartSweep(ctx, actor, v1.ID, "windows[7].masd_threshold", []float64{5}); !errors.As(err, &ve) {
		t.Errorf("unknown parameter: %v, want a validation error", err)
	}
	if _, err := s.StartSweep(ctx, actor, 999, "min_wear_hours", []float64{1}); !errors.Is(err, cohort.ErrNotFound) {
		t.Errorf("unknown version: %v", err)
	}
	pool.QueryRow(ctx, `SELECT count(*) FROM jobs WHERE kind = $1`, db.JobSweep).Scan(&n)
	if n != 1 {
		t.Errorf("%d sweep jobs queued, want only the one that could run", n)
	}
}
