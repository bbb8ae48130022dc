package web

import (
	"context"
	"net/http"
	"net/netip"
	"net/url"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/credential"
	"cohortdesk/db"
	"cohortdesk/db/dbtest"

	"github.com/go-chi/chi/v5"
)

// TestRouteTableByRole walks every route registered on the router and checks
// the answer for a visitor and for each role against the route table (HEAD,
// served for every GET route, answers as GET does). A route
// that is registered but missing from the table fails.
func TestRouteTableByRole(t *testing.T) {
	a := newApp(t)
	clients := map[cohort.Role]*http.Client{}
	for _, r := range cohort.Roles {
		clients[r] = a.signIn(r)
	}
	anon := a.client()
	seen := 0
	heads := map[string]bool{}
	err := chi.Walk(a.srv.router, func(method, pattern string, _ http.Handler, _ ...func(http.Handler) http.Handler) error {
		if pattern == "/assets/*" || pattern == "/signout" {
			return nil // static files are public; sign-out is tested on its own below
		}
		acc, ok := a.srv.accessOf(method, pattern)
		if !ok {
			t.Errorf("%s %s is registered but not in the route table", method, pattern)
			return nil
		}
		if method == "HEAD" {
			heads[pattern] = true
		} else {
			seen++
		}
		path := strings.NewReplacer("{id}", "999999", "{code}", "XX", "{week}", "1", "{kind}", "hr").Replace(pattern)
		do := func(c *http.Client, method string) *http.Response {
			req, _ := http.NewRequest(method, a.ts.URL+path, strings.NewReader(""))
			if method == "POST" {
				req.Header.Set("Content-Type", "application/x-www-form-urlencoded")
			}
			res, err := c.Do(req)
			if err != nil {
				t.Fatalf("%s %s: %v", method, path, err)
			}
			res.Body.Close()
			return res
		}
		// HEAD answers as GET does: same status, same kind of content.
		sameAsGet := func(who string, c *http.Client, res *http.Response) {
			if method != "HEAD" {
				return
			}
			get := do(c, "GET")
			if res.StatusCode != get.StatusCode || res.Header.Get("Content-Type") != get.Header.Get("Content-Type") {
				t.Errorf("%s HEAD %s: status %d %q, GET gives %d %q", who, pattern, res.StatusCode, res.Header.Get("Content-Type"),
					get.StatusCode, get.Header.Get("Content-Type"))
			}
		}
		res := do(anon, method)
		sameAsGet("anonymous", anon, res)
		if acc.scrape {
			// No address is allowed to scrape in this app: everyone is refused.
			if res.StatusCode != http.StatusForbidden {
				t.Errorf("anonymous %s %s: status %d, want 403 (metrics are for allowed addresses only)", method, pattern, res.StatusCode)
			}
		} else if acc.public {
			if res.StatusCode == http.StatusSeeOther && strings.HasPrefix(res.Header.Get("Location"), "/signin") && pattern != "/signin" {
				t.Errorf("anonymous %s %s: sent to sign-in but the route is public", method, pattern)
			}
		} else if res.StatusCode != http.StatusSeeOther || !strings.HasPrefix(res.Header.Get("Location"), "/signin") {
			t.Errorf("anonymous %s %s: status %d location %q, want a redirect to sign-in", method, pattern, res.StatusCode, res.Header.Get("Location"))
		}
		for _, r := range cohort.Roles {
			res := do(clients[r], method)
			sameAsGet(string(r), clients[r], res)
			switch {
			case acc.allows(r) && res.StatusCode == http.StatusForbidden:
				t.Errorf("%s %s %s: 403 but the table allows it", r, method, pattern)
			case acc.allows(r) && res.StatusCode == http.StatusSeeOther && strings.HasPrefix(res.Header.Get("Location"), "/signin"):
				t.Errorf("%s %s %s: sent to sign-in", r, method, pattern)
			case acc.allows(r) && res.StatusCode >= 500:
				t.Errorf("%s %s %s: server error %d", r, method, pattern, res.StatusCode)
			case !acc.allows(r) && res.StatusCode != http.StatusForbidden:
				t.Errorf("%s %s %s: status %d, want 403", r, method, pattern, res.StatusCode)
			}
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	if seen < len(a.srv.routeTable)-1 {
		t.Errorf("walked %d routes, table has %d", seen, len(a.srv.routeTable))
	}
	for _, rt := range a.srv.routeTable {
		if rt.method == "GET" && !heads[rt.pattern] {
			t.Errorf("GET %s answers no HEAD", rt.pattern)
		}
	}
}

func TestAnonymousIsSentToSignIn(t *testing.T) {
	a := newApp(t)
	res, _ := a.get(a.client(), "/participants?site=1")
	if res.StatusCode != http.StatusSeeOther || res.Header.Get("Location") != "/signin?next=%2Fparticipants%3Fsite%3D1" {
		t.Fatalf("status %d location %q", res.StatusCode, res.Header.Get("Location"))
	}
}

func TestCrossOriginPostIsRefused(t *testing.T) {
	a := newApp(t)
	c := a.signIn(cohort.Admin)
	form := url.Values{"email": {"new@example.org"}, "name": {"New Person"}, "role": {"monitor"}}
	req, _ := http.NewRequest("POST", a.ts.URL+"/admin/users", strings.NewReader(form.Encode()))
	req.Header.Set("Content-Type", "application/x-www-form-urlencoded")
	req.Header.Set("Sec-Fetch-Site", "cross-site")
	req.Header.Set("Origin", "https://elsewhere.example.net")
	res, err := c.Do(req)
	if err != nil {
		t.Fatal(err)
	}
	res.Body.Close()
	if res.StatusCode != http.StatusForbidden {
		t.Fatalf("cross-origin POST: status %d, want 403", res.StatusCode)
	}
	var n int
	a.store.Pool().QueryRow(context.Background(), `SELECT count(*) FROM users WHERE email = 'new@example.org'`).Scan(&n)
	if n != 0 {
		t.Fatal("the cross-origin POST created an account")
	}
	// The same request from our own origin works.
	req, _ = http.NewRequest("POST", a.ts.URL+"/admin/users", strings.NewReader(form.Encode()))
	req.Header.Set("Content-Type", "application/x-www-form-urlencoded")
	req.Header.Set("Sec-Fetch-Site", "same-origin")
	res, err = c.Do(req)
	if err != nil {
		t.Fatal(err)
	}
	res.Body.Close()
	if res.StatusCode != http.StatusOK {
		t.Fatalf("same-origin POST: status %d", res.StatusCode)
	}
}

func TestSessionCookieReplayedAfterSignOutIsRefused(t *testing.T) {
	a := newApp(t)
	c := a.signIn(cohort.Coordinator)
	u, _ := url.Parse(a.ts.URL)
	cookies := c.Jar.Cookies(u)
	if len(cookies) == 0 {
		t.Fatal("no session cookie")
	}
	for _, ck := range cookies {
		if ck.Name == "cohortdesk_session" && !(strings.Contains(strings.ToLower(a.rawSetCookie(t)), "httponly") && strings.Contains(strings.ToLower(a.rawSetCookie(t)), "samesite=lax")) {
			t.Error("session cookie is not HttpOnly with SameSite=Lax")
		}
	}
	if res, _ := a.get(c, "/"); res.StatusCode != 200 {
		t.Fatalf("signed in: status %d", res.StatusCode)
	}
	if res := a.postForm(c, "/signout", nil); res.StatusCode != http.StatusSeeOther {
		t.Fatalf("sign out: status %d", res.StatusCode)
	}
	replay := a.client()
	replay.Jar.SetCookies(u, cookies)
	res, _ := a.get(replay, "/")
	if res.StatusCode != http.StatusSeeOther || !strings.HasPrefix(res.Header.Get("Location"), "/signin") {
		t.Fatalf("replayed cookie after sign-out: status %d, want a redirect to sign-in", res.StatusCode)
	}
}

// rawSetCookie signs in once more and returns the raw Set-Cookie header.
func (a *app) rawSetCookie(t *testing.T) string {
	res := a.postForm(a.client(), "/signin", url.Values{"email": {"monitor@example.org"}, "password": {testPassword}})
	for _, c := range res.Header.Values("Set-Cookie") {
		if strings.HasPrefix(c, "cohortdesk_session=") {
			return c
		}
	}
	return ""
}

func TestSixthRapidWrongPasswordIsRefused(t *testing.T) {
	a := newApp(t)
	c := a.client()
	// An unknown account gets the same words as a wrong password.
	res, body := a.postFormBody(c, "/signin", url.Values{"email": {"nobody@example.org"}, "password": {"whatever it is"}})
	if res.StatusCode != http.StatusUnauthorized || !strings.Contains(body, msgSignInFailed) {
		t.Fatalf("unknown account: status %d", res.StatusCode)
	}
	wrong := url.Values{"email": {"coordinator@example.org"}, "password": {"not the password"}}
	for i := 1; i <= 5; i++ {
		res, body := a.postFormBody(c, "/signin", wrong)
		if res.StatusCode != http.StatusUnauthorized || !strings.Contains(body, msgSignInFailed) {
			t.Fatalf("attempt %d: status %d, want 401 with the common message", i, res.StatusCode)
		}
	}
	// After five failures the account is paused, even for the right password,
	// and the answer says for how long.
	res, body = a.postFormBody(c, "/signin", url.Values{"email": {"coordinator@example.org"}, "password": {testPassword}})
	if res.StatusCode != http.StatusTooManyRequests || !strings.Contains(body, "Too many failed attempts") || res.Header.Get("Retry-After") != "30" {
		t.Fatalf("sixth attempt: status %d, Retry-After %q", res.StatusCode, res.Header.Get("Retry-After"))
	}
	// Tried attempts are audited one by one; the refused one is only counted.
	var failures int
	a.store.Pool().QueryRow(context.Background(), `SELECT count(*) FROM audit_events WHERE action = 'signin.failed'`).Scan(&failures)
	if failures != 6 {
		t.Errorf("audited %d failed sign-ins, want 6", failures)
	}
	if row, _ := a.store.Throttled(context.Background(), accountKey("coordinator@example.org")); row.Refused != 1 || row.Failures != 5 {
		t.Errorf("throttle row %+v, want 5 failures and 1 refused", row)
	}
}

// TestThrottleByAccount: five failures for one account from five addresses stop
// the sixth from a sixth address.
func TestThrottleByAccount(t *testing.T) {
	a := newApp(t)
	a.srv.trustedProxies = []netip.Prefix{netip.MustParsePrefix("127.0.0.1/32")}
	try := func(addr, pw string) int {
		req, _ := http.NewRequest("POST", a.ts.URL+"/signin", strings.NewReader(url.Values{"email": {"investigator@example.org"}, "password": {pw}}.Encode()))
		req.Header.Set("Content-Type", "application/x-www-form-urlencoded")
		req.Header.Set("X-Forwarded-For", addr)
		res, err := a.client().Do(req)
		if err != nil {
			t.Fatal(err)
		}
		res.Body.Close()
		return res.StatusCode
	}
	for i := 1; i <= 5; i++ {
		if got := try("192.0.2."+itoa(int64(i)), "wrong password!"); got != http.StatusUnauthorized {
			t.Fatalf("attempt %d: %d", i, got)
		}
	}
	if got := try("192.0.2.77", testPassword); got != http.StatusTooManyRequests {
		t.Fatalf("sixth attempt for the account: %d, want 429", got)
	}
	var addrs int
	a.store.Pool().QueryRow(context.Background(), `SELECT count(DISTINCT client_addr) FROM audit_events WHERE action = 'signin.failed'`).Scan(&addrs)
	if addrs != 5 {
		t.Errorf("client addresses in the audit trail: %d, want 5 (from X-Forwarded-For of a trusted proxy; the refused sixth is counted, not audited)", addrs)
	}
}

func TestDeactivatedUserIsSignedOut(t *testing.T) {
	a := newApp(t)
	c := a.signIn(cohort.Monitor)
	a.exec(`UPDATE users SET active = false WHERE email = 'monitor@example.org'`)
	res, _ := a.get(c, "/")
	if res.StatusCode != http.StatusSeeOther {
		t.Fatalf("deactivated user: status %d, want a redirect to sign-in", res.StatusCode)
	}
}

func TestAuditTrailRefusesUpdateAndDelete(t *testing.T) {
	a := newApp(t)
	a.signIn(cohort.Admin) // writes a sign-in event
	ctx := context.Background()
	// The application's role may not change the table at all; the owner,
	// who may, is refused by the table's triggers.
	owner := dbtest.Owner(t, a.store.Pool())
	for _, sql := range []string{
		`UPDATE audit_events SET action = 'rewritten'`,
		`DELETE FROM audit_events`,
		`TRUNCATE audit_events`,
	} {
		if _, err := a.store.Pool().Exec(ctx, sql); err == nil || !strings.Contains(err.Error(), "permission denied") {
			t.Errorf("as the application: %s: err %v, want refusal by its grants", sql, err)
		}
		if _, err := owner.Exec(ctx, sql); err == nil || !strings.Contains(err.Error(), "append-only") {
			t.Errorf("as the owner: %s: err %v, want refusal by the database", sql, err)
		}
	}
	var n int
	a.store.Pool().QueryRow(ctx, `SELECT count(*) FROM audit_events WHERE action = 'signin'`).Scan(&n)
	if n != 1 {
		t.Fatalf("sign-in events: %d, want 1", n)
	}
}

func TestAdminManagesUsersAndEveryChangeIsAudited(t *testing.T) {
	a := newApp(t)
	c := a.signIn(cohort.Admin)
	res, body := a.postFormBody(c, "/admin/users", url.Values{"email": {"bad"}, "name": {""}, "role": {"monitor"}})
	if res.StatusCode != http.StatusUnprocessableEntity || !strings.Contains(body, `data-testid="error-email"`) || !strings.Contains(body, `data-testid="error-name"`) {
		t.Fatalf("invalid form: status %d, messages beside fields missing", res.StatusCode)
	}
	res, body = a.postFormBody(c, "/admin/users", url.Values{"email": {"r.fenwell@example.org"}, "name": {"Rosa Fenwell"}, "role": {"investigator"}})
	if res.StatusCode != 200 || !strings.Contains(body, "First password") {
		t.Fatalf("create: status %d", res.StatusCode)
	}
	u, err := a.store.UserForSignIn(context.Background(), "r.fenwell@example.org")
	if err != nil {
		t.Fatal(err)
	}
	path := "/admin/users/" + itoa(u.ID)
	// Deactivate with a stale version: refused as a conflict.
	res = a.postForm(c, path, url.Values{"name": {"Rosa Fenwell"}, "role": {"investigator"}, "version": {"99"}})
	if res.StatusCode != http.StatusConflict {
		t.Fatalf("stale edit: status %d, want 409", res.StatusCode)
	}
	res = a.postForm(c, path, url.Values{"name": {"Rosa Fenwell"}, "role": {"monitor"}, "version": {itoa(int64(u.Version))}})
	if res.StatusCode != http.StatusSeeOther {
		t.Fatalf("edit: status %d", res.StatusCode)
	}
	var n int
	a.store.Pool().QueryRow(context.Background(), `SELECT count(*) FROM audit_events WHERE object_type = 'user' AND object_id = $1 AND action IN ('user.create','user.update')`, itoa(u.ID)).Scan(&n)
	if n != 2 {
		t.Fatalf("audit events for the account: %d, want 2", n)
	}
	res, body = a.get(c, "/admin/audit?object=user&object_id="+itoa(u.ID))
	if res.StatusCode != 200 || !strings.Contains(body, "user.update") {
		t.Fatalf("audit page: status %d or event missing", res.StatusCode)
	}
	res, body = a.get(c, "/admin/audit.csv?action=user.")
	if res.StatusCode != 200 || !strings.HasPrefix(body, "id,at_utc,actor_id") || !strings.Contains(body, "user.update") {
		t.Fatalf("audit CSV: status %d, body %.200q", res.StatusCode, body)
	}
}

func itoa(n int64) string { return strconvFormat(n) }

func TestSessionIdleTimeoutSignsOut(t *testing.T) {
	a := newApp(t)
	a.srv.sessions.IdleTimeout = 1500 * time.Millisecond
	c := a.signIn(cohort.Coordinator)
	if res, _ := a.get(c, "/"); res.StatusCode != 200 {
		t.Fatalf("fresh session: %d", res.StatusCode)
	}
	time.Sleep(2 * time.Second)
	if res, _ := a.get(c, "/"); res.StatusCode != http.StatusSeeOther {
		t.Fatalf("after the idle timeout: status %d, want a redirect to sign-in", res.StatusCode)
	}
}

func TestSecureCookieBehindTrustedProxy(t *testing.T) {
	pool := dbtest.Pool(t)
	store := db.New(pool, nil)
	srv := New(Config{Store: store, Pool: pool, Password: credential.TestParams, Session: SessionConfig{Secure: true}})
	if !srv.sessions.Cookie.Secure || !srv.sessions.Cookie.HttpOnly || srv.sessions.Cookie.SameSite != http.SameSiteLaxMode {
		t.Fatalf("cookie flags: %+v", srv.sessions.Cookie)
	}
	if srv.sessions.Lifetime != 12*time.Hour || New(Config{Store: store}).sessions.IdleTimeout != 30*time.Minute {
		t.Fatal("default timeouts are not 30 min idle and 12 h absolute")
	}
}
