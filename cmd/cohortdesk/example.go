package main

import (
	"bufio"
	"context"
	"flag"
	"fmt"
	"os"
	"time"

	"cohortdesk/cohort/demo"
)

// runExampleData writes the fictional study's wear data as a readings CSV, so
// users can see the format and try the importer on a file of any size.
func runExampleData(ctx context.Context, e env, args []string) error {
	fs := flag.NewFlagSet("example-data", flag.ContinueOnError)
	fs.SetOutput(e.stderr)
	out := fs.String("out", "", "file to write (required)")
	seed := fs.Uint64("seed", 20260301, "seed of the fictional study (the demo's default)")
	participants := fs.Int("participants", 240, "participants")
	today := fs.String("today", "", "the study's today, YYYY-MM-DD (default: the real today, as the demo uses)")
	if err := fs.Parse(args); err != nil {
		return err
	}
	if *out == "" {
		return fmt.Errorf("example-data: -out is required")
	}
	now := time.Now()
	if *today != "" {
		t, err := time.Parse("2006-01-02", *today)
		if err != nil {
			return fmt.Errorf("example-data: -today %q: want YYYY-MM-DD", *today)
		}
		now = t.Add(12 * time.Hour)
	}
	st, err := demo.New(demo.Config{Seed: *seed, Participants: *participants, Today: now})
	if err != nil {
		return err
	}
	f, err := os.Create(*out)
	if err != nil {
		return err
	}
	bw := bufio.NewWriterSize(f, 1<<20)
	w := demo.NewCSVWriter(bw)
	n := 0
	for _, p := range st.Participants {
		if ctx.Err() != nil {
			f.Close()
			return ctx.Err()
		}
		for wk := range st.Weeks(p) {
			n += demo.Readings(&wk)
			if err := w.WriteWeek(p, wk); err != nil {
				f.Close()
				return err
			}
		}
	}
	if err := w.Flush(); err != nil {
		f.Close()
		return err
	}
	if err := bw.Flush(); err != nil {
		f.Close()
		return err
	}
	if err := f.Close(); err != nil {
		return err
	}
	fmt.Fprintf(e.stdout, "wrote %d readings of %d fictional participants to %s\n", n, *participants, *out)
	return nil
}
