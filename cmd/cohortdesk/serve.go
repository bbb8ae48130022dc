package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"log/slog"
	"net/http"
	"time"

	"cohortdesk/db"
	"cohortdesk/web"

	"github.com/jackc/pgx/v5/pgxpool"
)

func runServe(ctx context.Context, e env, args []string) error {
	fs := flag.NewFlagSet("serve", flag.ContinueOnError)
	fs.SetOutput(e.stderr)
	var cfg serverConfig
	cfg.bind(fs, e.getenv, ":8080")
	fs.StringVar(&cfg.DatabaseURL, "database-url", e.getenv("DATABASE_URL"), "PostgreSQL URL (env DATABASE_URL)")
	if err := fs.Parse(args); err != nil {
		return err
	}
	if cfg.DatabaseURL == "" {
		return errors.New("serve: DATABASE_URL is not set; for a demo on a private database run `cohortdesk demo`")
	}
	if cfg.Secret == "" {
		return errors.New("serve: COHORTDESK_SECRET is not set; it keys the pseudonymous referral codes and must stay the same for the life of the study (generate one with `head -c 32 /dev/urandom | base64`)")
	}
	if err := cfg.validate(); err != nil {
		return err
	}
	log := cfg.logger(e.stderr)
	pool, err := db.Open(ctx, cfg.DatabaseURL, int32(cfg.MaxConns))
	if err != nil {
		return err
	}
	defer pool.Close()
	if cfg.Migrate {
		n, err := migrateAs(ctx, cfg.MigrateURL, pool)
		if err != nil {
			return err
		}
		log.Info("migrations applied", "count", n, "as_owner", cfg.MigrateURL != "")
	}
	warnRole(ctx, pool, log)
	return serveApp(ctx, cfg, pool, log, "", func(addr string) {
		log.Info("listening", "addr", addr, "database", redactURL(cfg.DatabaseURL))
	})
}

// serveApp runs the web server and the background workers until ctx ends,
// then shuts both down gracefully.
func serveApp(ctx context.Context, cfg serverConfig, pool *pgxpool.Pool, log *slog.Logger, demoNote string, ready func(string)) error {
	store := db.New(pool, nil)
	active, err := store.EnsureDefaultProtocol(ctx)
	if err != nil {
		return err
	}
	log.Info("screening protocol", "active", active.Label())
	// The kept figures: built once on a database that held a study before
	// they were kept, then kept current by every change; what bulk loads
	// leave waiting is computed in the background.
	if err := store.EnsureFigures(ctx); err != nil {
		return err
	}
	bg, stopBackground := context.WithCancel(ctx)
	defer stopBackground()
	go store.KeepFigures(bg, time.Second, log)
	var standbyPool *pgxpool.Pool
	if cfg.ReadURL != "" {
		if standbyPool, err = db.Open(ctx, cfg.ReadURL, int32(cfg.MaxConns)); err != nil {
			return fmt.Errorf("serve: the read database (DATABASE_READ_URL): %w", err)
		}
		defer standbyPool.Close()
		store.UseStandby(bg, standbyPool, db.StandbyOptions{MaxLag: cfg.ReadMaxLag, Log: log})
		log.Info("pages that only read go to the standby", "database", redactURL(cfg.ReadURL), "max_lag", cfg.ReadMaxLag.String())
	}
	allow, err := cfg.metricsAllowed()
	if err != nil {
		return err
	}
	// Uploads a killed server was receiving are useless now (their imports
	// are marked interrupted); an hour spares other instances' live ones.
	if n := web.RemoveStaleUploads(time.Hour); n > 0 {
		log.Info("stale uploads removed", "count", n)
	}
	stopWatch := watchInterruptedImports(ctx, store, interruptedEvery, log)
	defer stopWatch()
	snd, outreachCfg, err := cfg.Outreach.build(store, log)
	if err != nil {
		return err
	}
	if err := startOutreach(ctx, store, snd); err != nil {
		return err
	}
	stopWorkers := startWorkers(ctx, store, cfg.Workers, snd.Handlers(), log)
	defer stopWorkers()
	proxies, err := cfg.proxies()
	if err != nil {
		return err
	}
	srv := web.New(web.Config{
		Store:          store,
		Pool:           pool,
		Logger:         log,
		TrustedProxies: proxies,
		Session: web.SessionConfig{
			Idle:     cfg.SessionIdle,
			Lifetime: cfg.SessionLifetime,
			Secure:   cfg.TLSCert != "" || len(proxies) > 0,
		},
		DemoNote:     demoNote,
		Secret:       []byte(cfg.Secret),
		Outreach:     outreachCfg,
		MetricsAllow: allow,
		StandbyPool:  standbyPool,
	})
	if cfg.MetricsAddr != "" {
		ms := web.NewHTTPServer(cfg.MetricsAddr, srv.MetricsHandler())
		go func() {
			log.Info("metrics listening", "addr", cfg.MetricsAddr)
			if err := ms.ListenAndServe(); err != nil && !errors.Is(err, http.ErrServerClosed) {
				log.Error("metrics listener", "err", err)
			}
		}()
		defer ms.Close()
	}
	hs := web.NewHTTPServer(cfg.Addr, srv.Handler())
	if cfg.TLSCert != "" {
		srv.UseTLS(cfg.TLSCert, cfg.TLSKey)
	}
	start := time.Now()
	err = srv.Serve(ctx, hs, ready)
	log.Info("web server stopped", "uptime", time.Since(start).Round(time.Second).String())
	if err != nil {
		return fmt.Errorf("serve: %w", err)
	}
	return nil
}
