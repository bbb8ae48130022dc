package web

import (
	"context"
	"net/http"
	"net/url"
	"regexp"
	"strings"
	"testing"

	"cohortdesk/cohort"
)

// TestAdminPasswordResetEndsSessions (issue 14, finding 6): an administrator's
// reset signs the person out everywhere, like a deactivation.
func TestAdminPasswordResetEndsSessions(t *testing.T) {
	a := newApp(t)
	person := a.signIn(cohort.Investigator)
	if res, _ := a.get(person, "/"); res.StatusCode != 200 {
		t.Fatalf("before the reset: %d", res.StatusCode)
	}
	admin := a.signIn(cohort.Admin)
	res, body := a.postFormBody(admin, "/admin/users/"+itoa(a.users[cohort.Investigator].ID)+"/password", nil)
	if res.StatusCode != 200 || !strings.Contains(body, "New password for") {
		t.Fatalf("reset: %d", res.StatusCode)
	}
	if res, _ := a.get(person, "/"); res.StatusCode != http.StatusSeeOther || !strings.HasPrefix(res.Header.Get("Location"), "/signin") {
		t.Fatalf("after the reset: status %d location %q, want the sign-in page", res.StatusCode, res.Header.Get("Location"))
	}
	if res, _ := a.get(admin, "/"); res.StatusCode != 200 {
		t.Errorf("the administrator was signed out too: %d", res.StatusCode)
	}
}

var shownPassword = regexp.MustCompile(`(?:First password|New password for [^:]+) \(shown once[^)]*\): ([A-Za-z0-9]+)`)

// TestAdministratorSetPasswordMustBeChanged (issue 14, finding 6): a new
// account's first password works once: its owner is sent to change it and
// reaches nothing else until they have.
func TestAdministratorSetPasswordMustBeChanged(t *testing.T) {
	a := newApp(t)
	admin := a.signIn(cohort.Admin)
	_, body := a.postFormBody(admin, "/admin/users", url.Values{"email": {"n.ambleside@example.org"}, "name": {"Nell Ambleside"}, "role": {"monitor"}})
	m := shownPassword.FindStringSubmatch(body)
	if m == nil {
		t.Fatalf("no first password shown:\n%.1500s", body)
	}
	c := a.client()
	res := a.postForm(c, "/signin", url.Values{"email": {"n.ambleside@example.org"}, "password": {m[1]}, "next": {"/cases"}})
	if res.StatusCode != http.StatusSeeOther || res.Header.Get("Location") != "/account/password" {
		t.Fatalf("first sign-in: %d to %q, want the change-password page", res.StatusCode, res.Header.Get("Location"))
	}
	for _, p := range []string{"/", "/participants", "/cases", "/account/second-factor?x=1"} {
		res, _ := a.get(c, p)
		if p == "/account/second-factor?x=1" {
			if res.StatusCode != 200 {
				t.Errorf("%s: %d, the account pages stay open", p, res.StatusCode)
			}
			continue
		}
		if res.StatusCode != http.StatusSeeOther || res.Header.Get("Location") != "/account/password" {
			t.Errorf("%s before the change: %d to %q", p, res.StatusCode, res.Header.Get("Location"))
		}
	}
	_, body = a.get(c, "/account/password")
	if !strings.Contains(body, `data-testid="password-required"`) {
		t.Error("the page does not say why")
	}
	res, body = a.postFormBody(c, "/account/password", url.Values{"current": {m[1]}, "new": {"a fresh long passphrase"}, "repeat": {"a fresh long passphrase"}})
	if res.StatusCode != 200 || !strings.Contains(body, "Your password is changed") {
		t.Fatalf("change: %d", res.StatusCode)
	}
	if res, _ := a.get(c, "/cases"); res.StatusCode != 200 {
		t.Fatalf("after the change: %d", res.StatusCode)
	}
	var must bool
	a.store.Pool().QueryRow(context.Background(), `SELECT must_change_password FROM users WHERE email = 'n.ambleside@example.org'`).Scan(&must)
	if must {
		t.Error("still marked to change")
	}
}

// TestChangeOwnPassword (issue 14, finding 6): the current password is asked,
// the new one must meet the policy (length, common passwords, the person's
// name), and the change ends the account's other sessions.
func TestChangeOwnPassword(t *testing.T) {
	a := newApp(t)
	c := a.signIn(cohort.Coordinator)
	other := a.signIn(cohort.Coordinator)
	for _, tc := range []struct {
		current, new, repeat, field string
	}{
		{"not my password", "a fresh long passphrase", "a fresh long passphrase", "current"},
		{testPassword, "short", "short", "new"},
		{testPassword, "password2026!", "password2026!", "new"},
		{testPassword, "123456789012", "123456789012", "new"},
		{testPassword, "coordinator1234", "coordinator1234", "new"},
		{testPassword, "a fresh long passphrase", "a fresh long passphrasE", "repeat"},
	} {
		res, body := a.postFormBody(c, "/account/password", url.Values{"current": {tc.current}, "new": {tc.new}, "repeat": {tc.repeat}})
		if res.StatusCode != http.StatusUnprocessableEntity || !strings.Contains(body, `data-testid="error-`+tc.field+`"`) {
			t.Errorf("%+v: status %d, want 422 beside %s", tc, res.StatusCode, tc.field)
		}
	}
	res, _ := a.postFormBody(c, "/account/password", url.Values{"current": {testPassword}, "new": {"a fresh long passphrase"}, "repeat": {"a fresh long passphrase"}})
	if res.StatusCode != 200 {
		t.Fatalf("change: %d", res.StatusCode)
	}
	if res, _ := a.get(c, "/"); res.StatusCode != 200 {
		t.Errorf("the changing session was signed out: %d", res.StatusCode)
	}
	if res, _ := a.get(other, "/"); res.StatusCode != http.StatusSeeOther {
		t.Errorf("the other session goes on: %d", res.StatusCode)
	}
	if res := a.postForm(a.client(), "/signin", url.Values{"email": {"coordinator@example.org"}, "password": {testPassword}}); res.StatusCode != http.StatusUnauthorized {
		t.Errorf("the old password still works: %d", res.StatusCode)
	}
	if res := a.postForm(a.client(), "/signin", url.Values{"email": {"coordinator@example.org"}, "password": {"a fresh long passphrase"}}); res.StatusCode != http.StatusSeeOther {
		t.Errorf("the new password: %d", res.StatusCode)
	}
	var n int
	a.store.Pool().QueryRow(context.Background(), `SELECT count(*) FROM audit_events WHERE action = 'user.password_changed'`).Scan(&n)
	if n != 1 {
		t.Errorf("audited changes: %d", n)
	}
}

// TestSetupSessionReachesOnlyAccountPages: a session that owes a step gets
// every route of the table except the account pages and sign-out sent to that
// step (the route-by-role walk for such sessions).
func TestSetupSessionReachesOnlyAccountPages(t *testing.T) {
	a := newApp(t)
	a.exec(`UPDATE users SET must_change_password = true WHERE email = 'investigator@example.org'`)
	c := a.client()
	if res := a.postForm(c, "/signin", url.Values{"email": {"investigator@example.org"}, "password": {testPassword}}); res.Header.Get("Location") != "/account/password" {
		t.Fatalf("sign-in went to %q", res.Header.Get("Location"))
	}
	for _, rt := range a.srv.routeTable {
		if rt.access.public || rt.access.scrape || rt.access.setup || rt.method != "GET" {
			continue
		}
		path := strings.NewReplacer("{id}", "1", "{code}", "XX", "{week}", "1", "{kind}", "hr", "{box}", "flagged").Replace(rt.pattern)
		res, _ := a.get(c, path)
		if res.StatusCode != http.StatusSeeOther || res.Header.Get("Location") != "/account/password" {
			t.Errorf("GET %s: %d to %q, want the change-password page", rt.pattern, res.StatusCode, res.Header.Get("Location"))
		}
	}
}
