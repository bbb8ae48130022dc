package main

import (
	"context"
	"fmt"
	"log/slog"
	"strings"
	"time"

	"cohortdesk/cmd/cohortdesk/demoload"
	"cohortdesk/db"
)

type demoOptions struct {
	Seed         uint64
	Participants int
	Secret       string
	Log          *slog.Logger
}

// seedDemo loads the fictional cohort when the database holds no study yet and
// reports whether it did.
func seedDemo(ctx context.Context, store *db.Store, o demoOptions) (bool, error) {
	name, err := store.StudyName(ctx)
	if err != nil || name != "" {
		return false, err
	}
	// The study's "today" is the real day, so due dates and recent weeks look
	// as they would in use.
	_, err = demoload.Load(ctx, store, demoload.Options{Seed: o.Seed, Participants: o.Participants, Today: time.Now(), Secret: []byte(o.Secret), Log: o.Log})
	return err == nil, err
}

// demoSignIn is the text printed with the address and shown on the sign-in
// page: the demo's own accounts that still take the demo password.
func demoSignIn(ctx context.Context, store *db.Store) string {
	users, err := demoload.SignInAccounts(ctx, store, demoload.DemoPassword)
	if err != nil || len(users) == 0 {
		return ""
	}
	var b strings.Builder
	fmt.Fprintf(&b, "Sign in with any of these fictional accounts (password %q):\n", demoload.DemoPassword)
	for _, u := range users {
		fmt.Fprintf(&b, "  %-36s %s\n", u.Email, u.Role.Label())
	}
	return b.String()
}
