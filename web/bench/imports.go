package bench

import (
	"bufio"
	"context"
	"fmt"
	"os"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/db"

	"github.com/jackc/pgx/v5"
)

// ImportResult compares our importer with plain COPY of the same readings.
type ImportResult struct {
	Readings  int64   `json:"readings"`
	FileBytes int64   `json:"file_bytes"`
	Generate  float64 `json:"generate_seconds"` // writing the file, not part of either figure
	// Ours is db.ImportReadings on the readings CSV: parsing, checks,
	// grouping by participant-week, merging with what is stored, encoding and
	// writing, in one transaction.
	Ours Rate `json:"ours"`
	// Copy is the baseline: pgx CopyFrom of the same readings, already
	// parsed, into a table with one row per reading and no index.
	Copy Rate `json:"copy"`
	// Ratio is our readings per second over COPY's.
	Ratio float64 `json:"ratio"`
	// Bytes per reading on disk (table, TOAST and indexes) of both layouts.
	OursBytesPerReading float64 `json:"ours_bytes_per_reading"`
	CopyBytesPerReading float64 `json:"copy_bytes_per_reading"`

	weeks int
}

// importWear generates the wear data of the cohort's wear participants as a
// readings CSV, imports it with our importer and, when the import or the
// screening comparison is measured, copies the same readings into
// bench_plain_readings for the baselines.
func importWear(ctx context.Context, store *db.Store, c synthCohort, o Options, say func(string, ...any)) (*ImportResult, error) {
	t0 := time.Now()
	wf, err := writeWearFile(o.Dir, o.Seed, c.Wear, o.Weeks)
	if err != nil {
		return nil, err
	}
	defer os.Remove(wf.Path)
	res := &ImportResult{Readings: wf.Readings, FileBytes: wf.Bytes, Generate: time.Since(t0).Seconds(), weeks: wf.Weeks}
	say("generated %d readings of %d participants (%d participant-weeks, %.0f MB) in %.1f s", wf.Readings, len(c.Wear), wf.Weeks,
		float64(wf.Bytes)/1e6, res.Generate)

	f, err := os.Open(wf.Path)
	if err != nil {
		return nil, fmt.Errorf("bench: %w", err)
	}
	defer f.Close()
	say("importing them with cohortdesk's importer ...")
	t1 := time.Now()
	ir, err := store.ImportReadings(ctx, cohort.System, bufio.NewReaderSize(f, 1<<20),
		db.ImportOptions{Kind: db.ImportReadingsCSV, FileName: "synthetic-readings.csv", Size: wf.Bytes, NoScreening: true})
	ours := time.Since(t1)
	if err != nil {
		return nil, err
	}
	if ir.Accepted != wf.Readings || ir.Rejected != 0 {
		return nil, fmt.Errorf("bench: the importer stored %d of %d generated readings and refused %d", ir.Accepted, wf.Readings, ir.Rejected)
	}
	res.Ours = rate(wf.Readings, ours)
	say("imported in %.1f s: %.0f readings/s", ours.Seconds(), res.Ours.ReadingsPerSecond)
	if !o.Import && !o.Screen {
		return res, nil
	}

	ids := make(map[string]int64, len(c.Wear))
	for _, p := range c.Wear {
		ids[p.StudyID] = p.ID
	}
	plain, err := parseWearFile(wf.Path, ids, wf.Readings)
	if err != nil {
		return nil, err
	}
	pool := store.Pool()
	if _, err := pool.Exec(ctx, `CREATE TABLE bench_plain_readings (participant_id bigint, t bigint, kind smallint, value integer, end_ms bigint)`); err != nil {
		return nil, fmt.Errorf("bench: %w", err)
	}
	say("copying the same readings, parsed, into a plain table with COPY ...")
	t2 := time.Now()
	n, err := pool.CopyFrom(ctx, pgx.Identifier{"bench_plain_readings"}, []string{"participant_id", "t", "kind", "value", "end_ms"},
		&copySource{p: plain, row: make([]any, 5)})
	cp := time.Since(t2)
	if err != nil {
		return nil, fmt.Errorf("bench: copy: %w", err)
	}
	if n != wf.Readings {
		return nil, fmt.Errorf("bench: copy stored %d of %d readings", n, wf.Readings)
	}
	res.Copy = rate(n, cp)
	res.Ratio = res.Ours.ReadingsPerSecond / res.Copy.ReadingsPerSecond
	say("copied in %.1f s: %.0f readings/s", cp.Seconds(), res.Copy.ReadingsPerSecond)
	for _, t := range []string{"wear_weeks", "bench_plain_readings"} {
		if _, err := pool.Exec(ctx, "VACUUM ANALYZE "+t); err != nil {
			return nil, fmt.Errorf("bench: %w", err)
		}
	}
	var oursBytes, copyBytes int64
	if err := pool.QueryRow(ctx, `SELECT pg_total_relation_size('wear_weeks'), pg_total_relation_size('bench_plain_readings')`).Scan(&oursBytes, &copyBytes); err != nil {
		return nil, fmt.Errorf("bench: %w", err)
	}
	res.OursBytesPerReading = float64(oursBytes) / float64(wf.Readings)
	res.CopyBytesPerReading = float64(copyBytes) / float64(wf.Readings)
	return res, nil
}
