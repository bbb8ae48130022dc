package db_test

import (
	"context"
	"fmt"
	"os"
	"strconv"
	"sync"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/screen"
	"cohortdesk/db"
	"cohortdesk/db/dbtest"
	"cohortdesk/migrations"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgxpool"
)

// Benchmark data: participant-weeks of fictional heart rate, one reading every
// 10 s for the whole week (60,480 readings a week), half steady and half
// irregular, stored twice in one database: compactly in wear_weeks (one row
// per participant-week, the codec's bytes) and one row per reading in a plain
// table hr_readings (participant_id, t, bpm) with its primary key. The number
// of participant-weeks is 100 (about 6 million readings), or
// COHORTDESK_BENCH_WEEKS. The database is built once per test binary, outside
// the timed loops.
var (
	benchOnce     sync.Once
	benchStore    *db.Store
	benchReadings int64
	benchWeeks    int
	benchErr      error
)

const benchWeeksPerParticipant = 5

func benchDB(b *testing.B) (*db.Store, int64, int) {
	b.Helper()
	benchOnce.Do(func() { benchErr = buildBenchDB() })
	if benchErr != nil {
		b.Fatal(benchErr)
	}
	return benchStore, benchReadings, benchWeeks
}

func buildBenchDB() error {
	ctx := context.Background()
	weeks := 100
	if v, err := strconv.Atoi(os.Getenv("COHORTDESK_BENCH_WEEKS")); err == nil && v > 0 {
		weeks = v
	}
	weeks = (weeks + benchWeeksPerParticipant - 1) / benchWeeksPerParticipant * benchWeeksPerParticipant
	admin, err := pgxpool.New(ctx, dbtest.Cluster().URL("postgres"))
	if err != nil {
		return err
	}
	defer admin.Close()
	name := fmt.Sprintf("bench_%d", os.Getpid())
	if _, err := admin.Exec(ctx, "CREATE DATABASE "+name); err != nil {
		return err
	}
	// The cluster, and this database with it, is removed when the binary ends.
	pool, err := db.Open(ctx, dbtest.Cluster().URL(name), 4)
	if err != nil {
		return err
	}
	if _, err := migrations.Up(ctx, pool); err != nil {
		return err
	}
	if _, err := pool.Exec(ctx, `CREATE TABLE hr_readings (participant_id bigint NOT NULL, t timestamptz NOT NULL, bpm smallint NOT NULL,
		PRIMARY KEY (participant_id, t))`); err != nil {
		return err
	}
	var total int64
	for pi := 0; pi < weeks/benchWeeksPerParticipant; pi++ {
		pid := dbtest.AddParticipant(b0{}, pool, fmt.Sprintf("B-%04d", pi), enrolDay)
		for wk := range benchWeeksPerParticipant {
			r := dbtest.Rhythm((pi + wk) % 2)
			hr := dbtest.SynthHR(uint64(pi*100+wk), r, dbtest.WeekStart(enrolDay, wk), 168, 10*time.Second)
			dbtest.PutWearWeek(b0{}, pool, pid, wk, cohort.HeartRate, hr)
			n, err := pool.CopyFrom(ctx, pgx.Identifier{"hr_readings"}, []string{"participant_id", "t", "bpm"},
				pgx.CopyFromSlice(hr.Len(), func(i int) ([]any, error) {
					return []any{pid, time.UnixMilli(hr.T[i]), int16(hr.V[i])}, nil
				}))
			if err != nil {
				return err
			}
			total += n
		}
	}
	for _, t := range []string{"hr_readings", "wear_weeks"} {
		if _, err := pool.Exec(ctx, "VACUUM ANALYZE "+t); err != nil {
			return err
		}
	}
	benchStore, benchReadings, benchWeeks = db.New(pool, func() time.Time { return fixedNow }), total, weeks
	return nil
}

// b0 lets the dbtest helpers run in the one-time setup: any failure there is a
// panic.
type b0 struct{}

func (b0) Helper()                   {}
func (b0) Fatalf(f string, a ...any) { panic(fmt.Sprintf(f, a...)) }

// masdWeeks reads every stored week through the store and computes each
// week's mean absolute successive difference of heart rate: our path,
// database read and decoding included.
func masdWeeks(ctx context.Context, s *db.Store) (int, float64, error) {
	weeks, sum := 0, 0.0
	err := s.EachWearWeek(ctx, nil, func(_ db.Participant, w *cohort.Week) error {
		v := w.HR.V
		if len(v) < 2 {
			return nil
		}
		var abs int64
		prev := v[0]
		for _, x := range v[1:] {
			d := int64(x - prev)
			if d < 0 {
				d = -d
			}
			abs += d
			prev = x
		}
		sum += float64(abs) / float64(len(v)-1)
		weeks++
		return nil
	})
	return weeks, sum, err
}

// masdSQL computes the same statistic in PostgreSQL with a lag() window over
// the one-row-per-reading table.
func masdSQL(ctx context.Context, s *db.Store) (int, float64, error) {
	rows, err := s.Pool().Query(ctx, `
		SELECT participant_id, week, avg(abs(bpm - prev))::float8
		FROM (
		  SELECT participant_id, week, bpm, lag(bpm) OVER (PARTITION BY participant_id, week ORDER BY t) AS prev
		  FROM (SELECT participant_id, t, bpm, floor(extract(epoch FROM t - $1::timestamptz) / 604800)::int AS week
		        FROM hr_readings) r
		) x
		WHERE prev IS NOT NULL
		GROUP BY participant_id, week`, dbtest.WeekStart(enrolDay, 0))
	if err != nil {
		return 0, 0, err
	}
	defer rows.Close()
	weeks, sum := 0, 0.0
	for rows.Next() {
		var pid int64
		var week int
		var m float64
		if err := rows.Scan(&pid, &week, &m); err != nil {
			return 0, 0, err
		}
		sum += m
		weeks++
	}
	return weeks, sum, rows.Err()
}

func reportReadings(b *testing.B, readings int64) {
	b.ReportMetric(float64(readings)*float64(b.N)/b.Elapsed().Seconds(), "readings/s")
}

// BenchmarkScreenFromDB is our path: the compact weeks read from PostgreSQL,
// decoded, and each week's MASD computed in Go. The sub-benchmark "screen"
// runs the whole windowed screen (cleaning, windows, verdict) instead.
func BenchmarkScreenFromDB(b *testing.B) {
	s, readings, weeks := benchDB(b)
	ctx := context.Background()
	b.Run("masd", func(b *testing.B) {
		for b.Loop() {
			n, _, err := masdWeeks(ctx, s)
			if err != nil || n != weeks {
				b.Fatalf("%d weeks (err %v), want %d", n, err, weeks)
			}
		}
		reportReadings(b, readings)
	})
	b.Run("screen", func(b *testing.B) {
		p := screen.DefaultProtocol()
		now := fixedNow.UnixMilli()
		for b.Loop() {
			n := 0
			err := s.EachWearWeek(ctx, nil, func(_ db.Participant, w *cohort.Week) error {
				if _, err := screen.Screen(w, p, now, nil); err != nil {
					return err
				}
				n++
				return nil
			})
			if err != nil || n != weeks {
				b.Fatalf("%d weeks (err %v), want %d", n, err, weeks)
			}
		}
		reportReadings(b, readings)
	})
}

// BenchmarkMASDInSQL is the baseline: the same per-week MASD over the same
// readings, computed by PostgreSQL with window functions.
func BenchmarkMASDInSQL(b *testing.B) {
	s, readings, weeks := benchDB(b)
	ctx := context.Background()
	for b.Loop() {
		n, _, err := masdSQL(ctx, s)
		if err != nil || n != weeks {
			b.Fatalf("%d weeks (err %v), want %d", n, err, weeks)
		}
	}
	reportReadings(b, readings)
}

// BenchmarkMASDRatio runs both paths in each iteration and reports how many
// times faster ours is, measured side by side on the same machine state. It
// also checks that both compute the same figures.
func BenchmarkMASDRatio(b *testing.B) {
	s, _, _ := benchDB(b)
	ctx := context.Background()
	var ours, theirs time.Duration
	for b.Loop() {
		t0 := time.Now()
		_, a, err := masdWeeks(ctx, s)
		if err != nil {
			b.Fatal(err)
		}
		t1 := time.Now()
		_, c, err := masdSQL(ctx, s)
		if err != nil {
			b.Fatal(err)
		}
		t2 := time.Now()
		ours += t1.Sub(t0)
		theirs += t2.Sub(t1)
		if d := a - c; d > 1e-6*a || d < -1e-6*a {
			b.Fatalf("sum of weekly MASD: ours %.9g, SQL %.9g", a, c)
		}
	}
	b.ReportMetric(theirs.Seconds()/ours.Seconds(), "x-faster")
}
