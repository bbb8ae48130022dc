package bench

import (
	"context"
	"fmt"
	"math"
	"slices"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/db"
)

// ScreenResult compares the screen's core statistic computed our way with the
// same statistic computed in SQL, and times the whole screen.
type ScreenResult struct {
	Weeks      int   `json:"weeks"`       // participant-weeks with heart rate
	HRReadings int64 `json:"hr_readings"` // heart-rate readings in them
	// MASDOurs reads every stored week from PostgreSQL (compact, one row per
	// participant-week and kind), decodes it and computes the week's mean
	// absolute successive difference of heart rate in Go.
	MASDOurs Rate `json:"masd_ours"`
	// MASDSQL is the baseline: the same statistic computed by PostgreSQL with
	// a lag() window over the one-row-per-reading table of the same readings.
	MASDSQL Rate `json:"masd_sql"`
	// Ratio is our readings per second over SQL's.
	Ratio float64 `json:"ratio"`
	// MaxRelDiff is the largest relative difference between the two results
	// of any week; the run fails above 1e-9.
	MaxRelDiff float64 `json:"max_rel_diff"`
	// Full is the whole screen (cleaning, windows of every size, beat
	// intervals, verdict) of every stored week, results stored, counted over
	// all readings (heart rate and steps).
	Full         Rate `json:"full_screen"`
	Positive     int  `json:"positive"`
	Negative     int  `json:"negative"`
	Insufficient int  `json:"insufficient"`
}

type weekKey struct {
	pid  int64
	week int
}

// masdOurs computes the MASD of heart rate of every stored week of the given
// participants from the compact weeks, through the store.
func masdOurs(ctx context.Context, store *db.Store, ids []int64) (map[weekKey]float64, int64, error) {
	out := map[weekKey]float64{}
	var n int64
	err := store.EachWearWeek(ctx, ids, func(p db.Participant, w *cohort.Week) error {
		v := w.HR.V
		if len(v) < 2 {
			return nil
		}
		var abs int64
		for i := 1; i < len(v); i++ {
			d := int64(v[i] - v[i-1])
			if d < 0 {
				d = -d
			}
			abs += d
		}
		out[weekKey{p.ID, w.Week}] = float64(abs) / float64(len(v)-1)
		n += int64(len(v))
		return nil
	})
	return out, n, err
}

// masdSQL computes the same in PostgreSQL: each reading's study week from the
// participant's enrolment day (all synthetic participants are in UTC), the
// previous reading of the same week by lag(), the mean of the absolute
// differences. The application's connections run without JIT compilation
// (db.Open); this analytic query gets PostgreSQL's default, JIT on, as the
// fairer baseline.
func masdSQL(ctx context.Context, store *db.Store) (map[weekKey]float64, int64, error) {
	tx, err := store.Pool().Begin(ctx)
	if err != nil {
		return nil, 0, err
	}
	defer tx.Rollback(ctx)
	if _, err := tx.Exec(ctx, `SET LOCAL jit = on`); err != nil {
		return nil, 0, err
	}
	rows, err := tx.Query(ctx, `
		SELECT participant_id, week, avg(abs(value - prev))::float8, count(*) + 1
		FROM (
		  SELECT r.participant_id, r.value, wk.week,
		         lag(r.value) OVER (PARTITION BY r.participant_id, wk.week ORDER BY r.t) AS prev
		  FROM bench_plain_readings r
		  JOIN participants p ON p.id = r.participant_id
		  CROSS JOIN LATERAL (SELECT floor((r.t - extract(epoch FROM p.enrolled_on::timestamp) * 1000) / 604800000)::int AS week) wk
		  WHERE r.kind = 1
		) x
		WHERE prev IS NOT NULL
		GROUP BY participant_id, week`)
	if err != nil {
		return nil, 0, err
	}
	defer rows.Close()
	out := map[weekKey]float64{}
	var total int64
	for rows.Next() {
		var k weekKey
		var m float64
		var n int64
		if err := rows.Scan(&k.pid, &k.week, &m, &n); err != nil {
			return nil, 0, err
		}
		out[k] = m
		total += n
	}
	return out, total, rows.Err()
}

// masdRounds is how many times each MASD path runs, the two alternating, so
// a cold cache or a burst of other work on the machine does not decide the
// ratio; the median time of each path is reported.
const masdRounds = 3

// measureScreen times both MASD paths over the same readings, checks that
// they agree week by week, then times the full screen.
func measureScreen(ctx context.Context, store *db.Store, ids []int64, say func(string, ...any)) (*ScreenResult, error) {
	res := &ScreenResult{}
	var (
		ours, theirs     map[weekKey]float64
		n, m             int64
		oursDur, sqlDurs []time.Duration
	)
	for round := 1; round <= masdRounds; round++ {
		say("per-week MASD of heart rate from the compact weeks, in Go (round %d of %d) ...", round, masdRounds)
		t0 := time.Now()
		var err error
		ours, n, err = masdOurs(ctx, store, ids)
		d := time.Since(t0)
		if err != nil {
			return nil, fmt.Errorf("bench: screen: %w", err)
		}
		oursDur = append(oursDur, d)
		say("done in %.2f s: %.0f readings/s", d.Seconds(), rate(n, d).ReadingsPerSecond)

		say("the same in SQL with lag() over one row per reading (round %d of %d) ...", round, masdRounds)
		t1 := time.Now()
		theirs, m, err = masdSQL(ctx, store)
		d = time.Since(t1)
		if err != nil {
			return nil, fmt.Errorf("bench: screen baseline: %w", err)
		}
		sqlDurs = append(sqlDurs, d)
		say("done in %.2f s: %.0f readings/s", d.Seconds(), rate(m, d).ReadingsPerSecond)
	}
	res.Weeks, res.HRReadings = len(ours), n
	res.MASDOurs, res.MASDSQL = rate(n, median(oursDur)), rate(m, median(sqlDurs))
	res.Ratio = res.MASDOurs.ReadingsPerSecond / res.MASDSQL.ReadingsPerSecond
	if len(theirs) != len(ours) || m != n {
		return nil, fmt.Errorf("bench: MASD in Go covers %d weeks and %d readings, in SQL %d and %d", len(ours), n, len(theirs), m)
	}
	for k, a := range ours {
		b, ok := theirs[k]
		if !ok {
			return nil, fmt.Errorf("bench: participant %d week %d has a MASD in Go but not in SQL", k.pid, k.week)
		}
		if diff := math.Abs(a-b) / math.Max(math.Abs(a), 1e-12); diff > res.MaxRelDiff {
			res.MaxRelDiff = diff
		}
	}
	if res.MaxRelDiff > 1e-9 {
		return nil, fmt.Errorf("bench: MASD in Go and in SQL differ by up to %.3g (relative)", res.MaxRelDiff)
	}

	say("the full screen of every stored week, results stored ...")
	var all int64
	if err := store.Pool().QueryRow(ctx, `SELECT coalesce(sum(n), 0) FROM wear_weeks WHERE participant_id = ANY($1)`, ids).Scan(&all); err != nil {
		return nil, err
	}
	t2 := time.Now()
	sum, err := db.NewScreener(store, nil).ScreenNow(ctx, ids, 0, nil)
	d := time.Since(t2)
	if err != nil {
		return nil, fmt.Errorf("bench: screen: %w", err)
	}
	res.Full = rate(all, d)
	res.Positive, res.Negative, res.Insufficient = sum.Positive, sum.Negative, sum.Insufficient
	say("done in %.1f s: %d weeks, %d positive, %d negative, %d insufficient", d.Seconds(), sum.Weeks, sum.Positive, sum.Negative, sum.Insufficient)
	return res, nil
}

// median is the middle of ds (the upper middle of an even count).
func median(ds []time.Duration) time.Duration {
	s := slices.Clone(ds)
	slices.Sort(s)
	return s[len(s)/2]
}
