package db_test

import (
	"context"
	"fmt"
	"math/rand/v2"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/wear"
	"cohortdesk/db"
	"cohortdesk/db/dbtest"

	"github.com/jackc/pgx/v5"
)

// benchCSV is a realistic readings file: per participant a week of heart rate
// (a random walk) every 1-5 minutes at rest, jittered, and every 4-6 s during a
// daily hour of exercise, plus steps over the hours with activity. Random (with
// a fixed seed) rather than regular, so compression cannot flatter the storage.
func benchCSV(participants int) (string, int) {
	rng := rand.New(rand.NewPCG(7, 11))
	var b strings.Builder
	b.WriteString("study_id,time,kind,value,end_time\n")
	rows := 0
	start := time.Date(2026, 3, 2, 6, 0, 0, 0, time.UTC)
	for p := 0; p < participants; p++ {
		id := fmt.Sprintf("B-%05d", p)
		at := start
		end := start.Add(7 * 24 * time.Hour)
		hr := 65
		nextSteps := start
		for at.Before(end) {
			exercise := at.Hour() == 18
			target := 65
			if exercise {
				target = 125
			}
			hr += rng.IntN(5) - 2 + (target-hr)/8
			fmt.Fprintf(&b, "%s,%s,heart_rate,%d,\n", id, at.Format(time.RFC3339), hr)
			rows++
			if !at.Before(nextSteps) {
				fmt.Fprintf(&b, "%s,%s,steps,%d,%s\n", id, nextSteps.Format(time.RFC3339), rng.IntN(900), nextSteps.Add(15*time.Minute).Format(time.RFC3339))
				rows++
				nextSteps = nextSteps.Add(15 * time.Minute)
			}
			if exercise {
				at = at.Add(time.Duration(4000+rng.IntN(2000)) * time.Millisecond)
			} else {
				at = at.Add(time.Duration(60+rng.IntN(240)) * time.Second)
			}
		}
	}
	return b.String(), rows
}

func importBenchStore(b *testing.B, participants int) *db.Store {
	b.Helper()
	s := db.New(dbtest.Pool(b), nil)
	ctx := context.Background()
	if _, err := s.Pool().Exec(ctx, `INSERT INTO sites (code, name) VALUES ('BB', 'Bench')`); err != nil {
		b.Fatal(err)
	}
	if _, err := s.Pool().Exec(ctx, `INSERT INTO participants (study_id, site_id, time_zone, enrolled_on)
		SELECT 'B-' || lpad(g::text, 5, '0'), 1, 'UTC', '2026-03-02' FROM generate_series(0, $1 - 1) g`, participants); err != nil {
		b.Fatal(err)
	}
	return s
}

// BenchmarkImportVersusCopy measures, in one run, our import of a readings
// CSV end to end (parse, check, group, merge, encode, write) against the
// fastest way PostgreSQL takes rows: pgx CopyFrom of the same readings,
// already parsed, into a one-row-per-reading table with no index. It reports
// readings per second of both, their ratio, and bytes per reading on disk of
// both layouts (table, TOAST and indexes).
//
//	go test ./db -run '^$' -bench ImportVersusCopy -benchtime 3x
func BenchmarkImportVersusCopy(b *testing.B) {
	const participants = 200
	file, rows := benchCSV(participants)
	// Parse once for the baseline, outside its timing.
	src := wear.NewCSVReader(strings.NewReader(file), "bench.csv")
	var parsed [][]any
	ids := map[string]int64{}
	for i := 0; i < participants; i++ {
		ids[fmt.Sprintf("B-%05d", i)] = int64(i + 1)
	}
	for src.Next() {
		r := src.Row()
		parsed = append(parsed, []any{ids[r.StudyID], r.T, int16(r.Kind), r.V, r.End})
	}
	if len(parsed) != rows {
		b.Fatalf("parsed %d of %d rows", len(parsed), rows)
	}
	ctx := context.Background()
	var ours, copyDur time.Duration
	var oursBytes, copyBytes int64
	for i := 0; i < b.N; i++ {
		b.StopTimer()
		s := importBenchStore(b, participants)
		_, err := s.Pool().Exec(ctx, `CREATE TABLE naive_readings (participant_id bigint, t bigint, kind smallint, value integer, end_ms bigint)`)
		if err != nil {
			b.Fatal(err)
		}
		b.StartTimer()
		t0 := time.Now()
		rep, err := s.ImportReadings(ctx, cohort.System, strings.NewReader(file), db.ImportOptions{Kind: db.ImportReadingsCSV, FileName: "bench.csv"})
		ours += time.Since(t0)
		if err != nil || rep.Accepted != int64(rows) {
			b.Fatalf("import: %v (accepted %d of %d)", err, rep.Accepted, rows)
		}
		t1 := time.Now()
		n, err := s.Pool().CopyFrom(ctx, pgx.Identifier{"naive_readings"}, []string{"participant_id", "t", "kind", "value", "end_ms"}, pgx.CopyFromRows(parsed))
		copyDur += time.Since(t1)
		if err != nil || n != int64(rows) {
			b.Fatalf("copy: %v (%d rows)", err, n)
		}
		b.StopTimer()
		_, _ = s.Pool().Exec(ctx, `VACUUM ANALYZE wear_weeks`)
		_, _ = s.Pool().Exec(ctx, `VACUUM ANALYZE naive_readings`)
		s.Pool().QueryRow(ctx, `SELECT pg_total_relation_size('wear_weeks'), pg_total_relation_size('naive_readings')`).Scan(&oursBytes, &copyBytes)
		b.StartTimer()
	}
	oursRate := float64(rows*b.N) / ours.Seconds()
	copyRate := float64(rows*b.N) / copyDur.Seconds()
	b.ReportMetric(oursRate, "import-readings/s")
	b.ReportMetric(copyRate, "copy-readings/s")
	b.ReportMetric(oursRate/copyRate, "ratio")
	b.ReportMetric(float64(oursBytes)/float64(rows), "import-bytes/reading")
	b.ReportMetric(float64(copyBytes)/float64(rows), "naive-bytes/reading")
}
