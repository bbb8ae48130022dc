package main

import (
	"bytes"
	"context"
	"regexp"
	"strings"
	"testing"

	"cohortdesk/cohort"
	"cohortdesk/cohort/credential"
	"cohortdesk/db"
	"cohortdesk/db/dbtest"
)

// The user command creates an account with a generated password that signs
// in, resets it to a new one (the old one stops working), lists accounts, and
// refuses an unknown role.
func TestUserCommand(t *testing.T) {
	url := dbtest.URL(t)
	ctx := context.Background()
	getenv := func(k string) string {
		if k == "DATABASE_URL" {
			return url
		}
		return ""
	}
	pwRE := regexp.MustCompile(`(?m)^password: (\S+)$`)
	user := func(args ...string) (string, error) {
		var out, errOut bytes.Buffer
		err := run(ctx, append([]string{"user"}, args...), getenv, &out, &errOut)
		return out.String(), err
	}
	pool, err := db.Open(ctx, url, 2)
	if err != nil {
		t.Fatal(err)
	}
	defer pool.Close()
	store := db.New(pool, nil)
	signsIn := func(pw string) bool {
		t.Helper()
		u, err := store.UserForSignIn(ctx, "lead@example.org")
		if err != nil {
			t.Fatal(err)
		}
		ok, err := credential.Verify(pw, u.PasswordHash)
		if err != nil {
			t.Fatal(err)
		}
		return ok
	}

	out, err := user("-email", "lead@example.org", "-name", "Ilvar Denstow", "-role", "investigator", "add")
	if err != nil {
		t.Fatalf("add: %v\n%s", err, out)
	}
	m := pwRE.FindStringSubmatch(out)
	if !strings.Contains(out, "created lead@example.org ("+cohort.Investigator.Label()+")") || m == nil {
		t.Fatalf("add printed:\n%s", out)
	}
	first := m[1]
	if !signsIn(first) {
		t.Fatal("the printed password does not match the stored hash")
	}

	out, err = user("-email", "lead@example.org", "reset-password")
	if err != nil {
		t.Fatalf("reset-password: %v\n%s", err, out)
	}
	m = pwRE.FindStringSubmatch(out)
	if m == nil || m[1] == first {
		t.Fatalf("reset-password printed:\n%s", out)
	}
	if !signsIn(m[1]) || signsIn(first) {
		t.Error("after a reset the new password must sign in and the old one not")
	}

	out, err = user("list")
	if err != nil || !strings.Contains(out, "lead@example.org") || !strings.Contains(out, "investigator") || !strings.Contains(out, "active") {
		t.Errorf("list: %v\n%s", err, out)
	}
	if out, err := user("-email", "x@example.org", "-name", "X", "-role", "owner", "add"); err == nil {
		t.Errorf("unknown role accepted:\n%s", out)
	}
}
