package main

import (
	"context"
	"errors"
	"flag"
	"fmt"

	"cohortdesk/db"
	"cohortdesk/migrations"
)

func runMigrate(ctx context.Context, e env, args []string) error {
	fs := flag.NewFlagSet("migrate", flag.ContinueOnError)
	fs.SetOutput(e.stderr)
	url := fs.String("database-url", envOr(e.getenv, migrateEnv, e.getenv("DATABASE_URL")), "PostgreSQL URL of the schema's owner (env "+migrateEnv+", else DATABASE_URL)")
	grant := fs.String("grant", e.getenv("COHORTDESK_APP_ROLE"), "after migrating, grant this application role what it needs (env COHORTDESK_APP_ROLE)")
	fs.Usage = func() {
		fmt.Fprintln(e.stderr, "usage: cohortdesk migrate [flags] [up|status]")
		fs.PrintDefaults()
	}
	if err := fs.Parse(args); err != nil {
		return err
	}
	if *url == "" {
		return errors.New("migrate: DATABASE_URL is not set")
	}
	action := "up"
	if fs.NArg() > 0 {
		action = fs.Arg(0)
	}
	pool, err := db.Open(ctx, *url, 2)
	if err != nil {
		return err
	}
	defer pool.Close()
	switch action {
	case "up":
		n, err := migrations.Up(ctx, pool)
		if err != nil {
			return err
		}
		fmt.Fprintf(e.stdout, "applied %d migration(s)\n", n)
		if *grant != "" {
			if err := db.GrantApp(ctx, pool, *grant); err != nil {
				return err
			}
			fmt.Fprintf(e.stdout, "granted the application role %s\n", *grant)
		}
		fallthrough
	case "status":
		list, err := migrations.List(ctx, pool)
		if err != nil {
			return err
		}
		for _, s := range list {
			state := "pending"
			if s.Applied {
				state = "applied"
			}
			fmt.Fprintf(e.stdout, "%04d  %-8s %s\n", s.Version, state, s.Name)
		}
		return nil
	}
	return fmt.Errorf("migrate: unknown action %q (want up or status)", action)
}
