package web

import (
	"context"
	"strings"
	"testing"

	"cohortdesk/cmd/cohortdesk/demoload"
	"cohortdesk/cohort"
	"cohortdesk/cohort/credential"
	"cohortdesk/db"
)

// TestDemoAccountsHaveTheirOwnSaltsAndOnlyTheyAreAdvertised (issue 14,
// finding 15): every demo account's hash has its own salt; the sign-in help
// lists only the loader's accounts that are active and still take the demo
// password, not an account an administrator added with the same password, a
// deactivated one, or one whose password was changed.
func TestDemoAccountsHaveTheirOwnSaltsAndOnlyTheyAreAdvertised(t *testing.T) {
	a := newApp(t)
	res := loadDemo(t, a, 12)
	ctx := context.Background()
	salts := map[string]string{}
	for _, u := range res.Users {
		full, err := a.store.UserForSignIn(ctx, u.Email)
		if err != nil {
			t.Fatal(err)
		}
		parts := strings.Split(full.PasswordHash, "$")
		if len(parts) != 6 {
			t.Fatalf("%s: hash %q", u.Email, full.PasswordHash)
		}
		if other, dup := salts[parts[4]]; dup {
			t.Errorf("%s and %s share the salt %s", u.Email, other, parts[4])
		}
		salts[parts[4]] = u.Email
	}
	list := func() []string {
		us, err := demoload.SignInAccounts(ctx, a.store, testPassword)
		if err != nil {
			t.Fatal(err)
		}
		var out []string
		for _, u := range us {
			out = append(out, u.Email)
		}
		return out
	}
	if got := list(); len(got) != len(res.Users) {
		t.Fatalf("advertised %v, want the %d demo accounts", got, len(res.Users))
	}
	// An administrator adds an account with the very same password.
	hash, _ := credential.Hash(testPassword, credential.TestParams)
	admin := a.users[cohort.Admin]
	if _, err := a.store.CreateUser(ctx, admin.Actor("127.0.0.1", ""), db.NewUser{Email: "added@example.net", Name: "Added Later", Role: cohort.Monitor, PasswordHash: hash}); err != nil {
		t.Fatal(err)
	}
	// One demo account is deactivated, another changes its password.
	off, changed := res.Users[1], res.Users[2]
	a.exec(`UPDATE users SET active = false WHERE email = $1`, off.Email)
	newHash, _ := credential.Hash("a different password 77", credential.TestParams)
	a.exec(`UPDATE users SET password_hash = $2 WHERE email = $1`, changed.Email, newHash)
	got := list()
	if len(got) != len(res.Users)-2 {
		t.Fatalf("advertised %v, want %d accounts", got, len(res.Users)-2)
	}
	for _, e := range got {
		if e == "added@example.net" || e == off.Email || e == changed.Email {
			t.Errorf("advertised %s", e)
		}
	}
}
