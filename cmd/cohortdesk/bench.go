package main

import (
	"context"
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"time"

	"cohortdesk/db/pgcluster"
	"cohortdesk/web/bench"

	"github.com/jackc/pgx/v5/pgxpool"
)

// benchDatabase is the database the bench creates in its private cluster.
const benchDatabase = "cohortdesk_bench"

// runBench builds a synthetic study at the chosen scale and measures the
// importer, the screen and the main pages, each against a baseline measured
// in the same run (package bench). It runs on a private PostgreSQL cluster it
// starts in a temporary folder, or on an empty database at DATABASE_URL.
func runBench(ctx context.Context, e env, args []string) error {
	fs := flag.NewFlagSet("bench", flag.ContinueOnError)
	fs.SetOutput(e.stderr)
	var o bench.Options
	fs.IntVar(&o.Participants, "participants", 20000, "participants in the synthetic study")
	fs.IntVar(&o.Weeks, "weeks", 12, "weeks of wear data per participant")
	fs.IntVar(&o.WearParticipants, "wear", 500, "participants whose wear data is generated and imported (the rest get screening results and cases by SQL)")
	parts := fs.String("parts", "import,screen,pages", "what to measure, comma-separated: import, screen, pages")
	clients := fs.String("clients", "1,50", "concurrent signed-in clients of the page load, comma-separated: one load for each")
	pages := fs.String("pages", "", "the pages to load, comma-separated (default all: "+strings.Join(bench.PageNames, ", ")+")")
	fs.DurationVar(&o.Duration, "duration", 30*time.Second, "how long the page load runs")
	fs.IntVar(&o.MaxConns, "db-max-conns", 20, "database connections of the server under load (serve's default)")
	seed := fs.Uint64("seed", 1, "seed of the synthetic data")
	out := fs.String("out", "", "also write the report as JSON to this file")
	dataDir := fs.String("data", "", "folder for the private PostgreSQL cluster (default: a new temporary folder, removed afterwards)")
	dbURL := fs.String("database-url", e.getenv("DATABASE_URL"), "run on this empty database instead of a private cluster (env DATABASE_URL)")
	cpuProfile := fs.String("cpuprofile", "", "write a CPU profile of the page loads (load generator and server together) to this file")
	if err := fs.Parse(args); err != nil {
		return err
	}
	for _, p := range strings.Split(*parts, ",") {
		switch strings.TrimSpace(p) {
		case "import":
			o.Import = true
		case "screen":
			o.Screen = true
		case "pages":
			o.Pages = true
		case "":
		default:
			return fmt.Errorf("bench: -parts: %q is not import, screen or pages", p)
		}
	}
	switch {
	case o.Participants < 100:
		return fmt.Errorf("bench: -participants %d: want at least 100", o.Participants)
	case o.Weeks < 1 || o.Weeks > 104:
		return fmt.Errorf("bench: -weeks %d: want 1 to 104", o.Weeks)
	case o.WearParticipants < 0 || o.WearParticipants > o.Participants/2:
		return fmt.Errorf("bench: -wear %d: want 0 to half the participants", o.WearParticipants)
	case o.Duration < time.Second || o.Duration > time.Hour:
		return fmt.Errorf("bench: -duration %s: want 1s to 1h", o.Duration)
	case o.MaxConns < 2 || o.MaxConns > 180:
		return fmt.Errorf("bench: -db-max-conns %d: want 2 to 180", o.MaxConns)
	}
	for _, c := range strings.Split(*clients, ",") {
		n, err := strconv.Atoi(strings.TrimSpace(c))
		if err != nil || n < 1 || n > 2000 {
			return fmt.Errorf("bench: -clients: %q: want numbers from 1 to 2000, comma-separated", c)
		}
		o.Clients = append(o.Clients, n)
	}
	for _, p := range strings.Split(*pages, ",") {
		if p = strings.TrimSpace(p); p != "" {
			if !slices.Contains(bench.PageNames, p) {
				return fmt.Errorf("bench: -pages: %q is not one of %s", p, strings.Join(bench.PageNames, ", "))
			}
			o.Only = append(o.Only, p)
		}
	}
	o.Seed = *seed
	o.Progress = e.stderr
	o.CPUProfile = *cpuProfile

	url := *dbURL
	if url == "" {
		dir := *dataDir
		if dir == "" {
			tmp, err := os.MkdirTemp("", "cohortdesk-bench-")
			if err != nil {
				return fmt.Errorf("bench: %w", err)
			}
			defer os.RemoveAll(tmp)
			// When run as root, the PostgreSQL server user must pass this folder.
			if err := os.Chmod(tmp, 0o755); err != nil {
				return fmt.Errorf("bench: %w", err)
			}
			dir = filepath.Join(tmp, "pg")
			o.Dir = tmp // the generated readings file goes there too
		}
		cl, err := pgcluster.Start(ctx, pgcluster.Config{Dir: dir}, e.getenv)
		if err != nil {
			return fmt.Errorf("bench: %w", err)
		}
		defer cl.Stop()
		if err := freshDatabase(ctx, cl); err != nil {
			return err
		}
		url = cl.URL(benchDatabase)
		fmt.Fprintf(e.stderr, "bench: private PostgreSQL in %s\n", cl.Dir())
	}
	rep, err := bench.Run(ctx, url, o)
	if err != nil {
		return err
	}
	if err := rep.WriteTable(e.stdout); err != nil {
		return err
	}
	if *out != "" {
		b, err := json.MarshalIndent(rep, "", "  ")
		if err != nil {
			return err
		}
		if err := os.WriteFile(*out, append(b, '\n'), 0o644); err != nil {
			return fmt.Errorf("bench: %w", err)
		}
		fmt.Fprintf(e.stderr, "bench: report written to %s\n", *out)
	}
	for _, p := range rep.Pages {
		if p.ServerErrors > 0 || p.TransportErrors > 0 {
			return errors.New("bench: some requests failed under load (see the table)")
		}
	}
	return nil
}

// freshDatabase drops and creates the bench database in the private cluster,
// so a kept data folder can be reused.
func freshDatabase(ctx context.Context, cl *pgcluster.Cluster) error {
	admin, err := pgxpool.New(ctx, cl.URL("postgres"))
	if err != nil {
		return fmt.Errorf("bench: %w", err)
	}
	defer admin.Close()
	for _, q := range []string{"DROP DATABASE IF EXISTS " + benchDatabase + " WITH (FORCE)", "CREATE DATABASE " + benchDatabase} {
		if _, err := admin.Exec(ctx, q); err != nil {
			return fmt.Errorf("bench: %s: %w", q, err)
		}
	}
	return nil
}
