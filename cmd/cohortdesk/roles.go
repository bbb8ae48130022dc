package main

import (
	"context"
	"fmt"
	"log/slog"

	"cohortdesk/db"
	"cohortdesk/migrations"

	"github.com/jackc/pgx/v5/pgxpool"
)

// migrateEnv names the owner's connection, which runs the migrations, when
// the application connects as its own unprivileged role (README,
// "Production").
const migrateEnv = "COHORTDESK_MIGRATE_DATABASE_URL"

// migrateAs brings the schema up to date for app, the application's pool.
// With an owner URL the migrations run as the owner, who then grants the
// application's role (app's current_user) what it needs; without one they
// run over app itself, as in a deployment with a single role.
func migrateAs(ctx context.Context, ownerURL string, app *pgxpool.Pool) (int, error) {
	if ownerURL == "" {
		return migrations.Up(ctx, app)
	}
	owner, err := db.Open(ctx, ownerURL, 2)
	if err != nil {
		return 0, fmt.Errorf("migrations: the owner's connection (%s): %w", migrateEnv, err)
	}
	defer owner.Close()
	n, err := migrations.Up(ctx, owner)
	if err != nil {
		return n, err
	}
	var role string
	if err := app.QueryRow(ctx, `SELECT current_user`).Scan(&role); err != nil {
		return n, fmt.Errorf("migrations: %w", err)
	}
	return n, db.GrantApp(ctx, owner, role)
}

// warnRole logs what the application's database role could do to the audit
// trail that it should not.
func warnRole(ctx context.Context, app *pgxpool.Pool, log *slog.Logger) {
	probs, err := db.RoleProblems(ctx, app)
	if err != nil {
		log.Warn("database role not checked", "err", err)
		return
	}
	for _, p := range probs {
		log.Warn("database role: "+p, "fix", "connect as an application role without ownership; run migrations as the owner via "+migrateEnv+" (README, Production)")
	}
}
