package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"path/filepath"
	"time"

	"cohortdesk/db"
	"cohortdesk/db/pgcluster"

	"github.com/jackc/pgx/v5/pgxpool"
)

const demoDatabase = "cohortdesk"

func runDemo(ctx context.Context, e env, args []string) error {
	fs := flag.NewFlagSet("demo", flag.ContinueOnError)
	fs.SetOutput(e.stderr)
	var cfg serverConfig
	cfg.bind(fs, e.getenv, "127.0.0.1:8080")
	dataDir := fs.String("data", defaultDataDir(e.getenv), "folder for the private PostgreSQL cluster (env COHORTDESK_DATA)")
	seed := fs.Uint64("seed", 20260301, "seed of the fictional cohort")
	participants := fs.Int("participants", 240, "participants in the fictional cohort")
	reset := fs.Bool("reset", false, "drop the demo database and load the cohort again")
	standby := fs.Bool("standby", false, "also run a hot standby of the private cluster (streaming replication, in DATA/standby) and read pages from it")
	if err := fs.Parse(args); err != nil {
		return err
	}
	if err := cfg.validate(); err != nil {
		return err
	}
	log := cfg.logger(e.stderr)
	start := time.Now()

	cl, err := pgcluster.Start(ctx, pgcluster.Config{Dir: *dataDir}, e.getenv)
	if err != nil {
		var ue *pgcluster.UnreachableError
		if errors.As(err, &ue) {
			return fmt.Errorf("demo: %w", err)
		}
		return fmt.Errorf("demo: %w", err)
	}
	// Stop PostgreSQL last, after the web server has finished its requests.
	defer func() {
		if err := cl.Stop(); err != nil {
			log.Warn("postgres stop", "err", err)
		} else {
			log.Info("postgres stopped")
		}
	}()
	log.Info("postgres ready", "data", cl.Dir(), "after", time.Since(start).Round(time.Millisecond).String())

	if cfg.Secret == "" {
		if cfg.Secret, err = demoSecret(cl.Dir()); err != nil {
			return err
		}
	}
	if cfg.Outreach.OutboxDir == "" && cfg.Outreach.SMTP.Host == "" {
		// The demo sends nothing: e-mails and text messages go to a folder.
		cfg.Outreach.OutboxDir = filepath.Join(cl.Dir(), "outbox")
	}
	if err := ensureDatabase(ctx, cl, *reset); err != nil {
		return err
	}
	// The cluster's superuser owns the schema and runs the migrations; the
	// app, the loader and the printed DATABASE_URL use the unprivileged
	// application role, which cannot rewrite the audit trail.
	cfg.MigrateURL = cl.URL(demoDatabase)
	cfg.DatabaseURL = cl.URLAs(demoDatabase, db.AppRole)
	if *standby {
		sb, err := pgcluster.StartStandby(ctx, cl, pgcluster.Config{Dir: filepath.Join(cl.Dir(), "standby"), Port: demoStandbyPort}, e.getenv)
		if err != nil {
			return fmt.Errorf("demo: standby: %w", err)
		}
		defer func() {
			if err := sb.Stop(); err != nil {
				log.Warn("standby stop", "err", err)
			}
		}()
		cfg.ReadURL = sb.URLAs(demoDatabase, db.AppRole)
		log.Info("standby ready", "data", sb.Dir())
	}
	pool, err := db.Open(ctx, cfg.DatabaseURL, int32(cfg.MaxConns))
	if err != nil {
		return err
	}
	defer pool.Close()
	if _, err := migrateAs(ctx, cfg.MigrateURL, pool); err != nil {
		return err
	}
	warnRole(ctx, pool, log)
	store := db.New(pool, nil)
	// The loader screens what it loads (newScreener(store).ScreenNow), so the
	// protocol must exist first.
	if _, err := store.EnsureDefaultProtocol(ctx); err != nil {
		return err
	}
	loaded, err := seedDemo(ctx, store, demoOptions{Seed: *seed, Participants: *participants, Secret: cfg.Secret, Log: log})
	if err != nil {
		return fmt.Errorf("demo: load the fictional cohort: %w", err)
	}
	if loaded {
		log.Info("fictional cohort loaded", "participants", *participants, "after", time.Since(start).Round(time.Millisecond).String())
	}
	signIn := demoSignIn(ctx, store)
	return serveApp(ctx, cfg, pool, log, signIn, func(addr string) {
		fmt.Fprintf(e.stdout, "\ncohortdesk demo is running at http://%s/  (started in %s)\n", addr, time.Since(start).Round(100*time.Millisecond))
		fmt.Fprint(e.stdout, signIn)
		fmt.Fprintf(e.stdout, "Database (for the import and user commands): DATABASE_URL='%s'\n", cfg.DatabaseURL)
		fmt.Fprintf(e.stdout, "Its owner (for migrate): %s='%s'\n", migrateEnv, cfg.MigrateURL)
		if cfg.Outreach.OutboxDir != "" {
			fmt.Fprintf(e.stdout, "Messages to participants are not sent: each is written to %s (.eml and .txt files).\n", cfg.Outreach.OutboxDir)
		}
		fmt.Fprintf(e.stdout, "Data folder: %s. Press Ctrl-C to stop.\n\n", cl.Dir())
	})
}

// demoStandbyPort names the demo standby's socket (the primary has 5432).
const demoStandbyPort = 5433

// ensureDatabase creates the demo database on first use (or after -reset).
func ensureDatabase(ctx context.Context, cl *pgcluster.Cluster, reset bool) error {
	admin, err := pgxpool.New(ctx, cl.URL("postgres"))
	if err != nil {
		return err
	}
	defer admin.Close()
	if reset {
		if _, err := admin.Exec(ctx, "DROP DATABASE IF EXISTS "+demoDatabase+" WITH (FORCE)"); err != nil {
			return fmt.Errorf("demo: drop database: %w", err)
		}
	}
	var exists bool
	if err := admin.QueryRow(ctx, "SELECT EXISTS (SELECT 1 FROM pg_database WHERE datname = $1)", demoDatabase).Scan(&exists); err != nil {
		return fmt.Errorf("demo: %w", err)
	}
	if !exists {
		if _, err := admin.Exec(ctx, "CREATE DATABASE "+demoDatabase); err != nil {
			return fmt.Errorf("demo: create database: %w", err)
		}
	}
	return db.EnsureAppRole(ctx, admin, db.AppRole)
}
