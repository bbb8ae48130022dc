package main

import (
	"context"
	"log/slog"

	"cohortdesk/db"
)

type demoOptions struct {
	Seed         uint64
	Participants int
	Log          *slog.Logger
}

// seedDemo loads the fictional cohort when the database holds no study yet and
// reports whether it did.
func seedDemo(ctx context.Context, store *db.Store, o demoOptions) (bool, error) {
	name, err := store.StudyName(ctx)
	if err != nil || name != "" {
		return false, err
	}
	return false, nil
}

// demoSignIn is the text printed with the address: who to sign in as.
func demoSignIn() string { return "" }
