package web

import (
	"context"
	"html"
	"net/http"
	"net/url"
	"regexp"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/credential"

	"github.com/chromedp/chromedp"
)

var (
	secretOnPage   = regexp.MustCompile(`data-testid="totp-secret">([A-Z2-7 ]+)<`)
	recoveryOnPage = regexp.MustCompile(`<li>([A-Za-z0-9]{4}-[A-Za-z0-9]{12})</li>`)
)

// enrolOverHTTP sets up the second factor for the signed-in client c at the
// clock's time and returns the secret and the recovery codes.
func enrolOverHTTP(t *testing.T, a *app, c *http.Client, now time.Time) (string, []string) {
	t.Helper()
	res, body := a.get(c, "/account/second-factor")
	m := secretOnPage.FindStringSubmatch(body)
	if res.StatusCode != 200 || m == nil || !strings.Contains(body, `src="data:image/png;base64,`) {
		t.Fatalf("enrolment page: %d, secret or QR missing:\n%.1500s", res.StatusCode, body)
	}
	secret := strings.ReplaceAll(m[1], " ", "")
	code, err := credential.TOTPCode(secret, now)
	if err != nil {
		t.Fatal(err)
	}
	res, body = a.postFormBody(c, "/account/second-factor", url.Values{"code": {code}})
	var codes []string
	for _, m := range recoveryOnPage.FindAllStringSubmatch(html.UnescapeString(body), -1) {
		codes = append(codes, m[1])
	}
	if res.StatusCode != 200 || len(codes) != credential.RecoveryCodes {
		t.Fatalf("confirm: %d, %d recovery codes", res.StatusCode, len(codes))
	}
	return secret, codes
}

// TestSecondFactorRequiredForRolesThatSeePHI (issue 14, finding 7): with the
// rule on, an investigator is sent to set up an authenticator before anything
// else, then signs in with password and code; a code is good once; a
// recovery code works once; a monitor (no identifying details) is not asked.
func TestSecondFactorRequiredForRolesThatSeePHI(t *testing.T) {
	a, clock := newAppWith(t, Config{})
	a.exec(`UPDATE sign_in_policy SET second_factor_required = true`)
	if res := a.signInFrom(a.client(), "192.0.2.1", "monitor@example.org", testPassword); res.Header.Get("Location") != "/" {
		t.Fatalf("monitor: sent to %q, want straight in", res.Header.Get("Location"))
	}
	c := a.client()
	if res := a.signInFrom(c, "192.0.2.2", "investigator@example.org", testPassword); res.Header.Get("Location") != "/account/second-factor" {
		t.Fatalf("investigator without a second factor: sent to %q", res.Header.Get("Location"))
	}
	if res, _ := a.get(c, "/participants"); res.Header.Get("Location") != "/account/second-factor" {
		t.Fatalf("a page before set-up: %d to %q", res.StatusCode, res.Header.Get("Location"))
	}
	secret, codes := enrolOverHTTP(t, a, c, clock.Now())
	if res, _ := a.get(c, "/participants"); res.StatusCode != 200 {
		t.Fatalf("after set-up: %d", res.StatusCode)
	}
	var sealed string
	a.store.Pool().QueryRow(context.Background(), `SELECT secret_sealed FROM second_factors`).Scan(&sealed)
	if strings.Contains(sealed, secret) || sealed == "" {
		t.Error("the secret is stored in clear")
	}
	var hashes int
	a.store.Pool().QueryRow(context.Background(), `SELECT count(*) FROM recovery_codes WHERE code_hash LIKE '$argon2id$%'`).Scan(&hashes)
	if hashes != credential.RecoveryCodes {
		t.Errorf("recovery codes hashed at rest: %d", hashes)
	}

	// Sign in again a minute later: the password leads to the code.
	clock.Add(time.Minute)
	d := a.client()
	if res := a.signInFrom(d, "192.0.2.2", "investigator@example.org", testPassword); res.Header.Get("Location") != "/signin/code" {
		t.Fatalf("password with a second factor: sent to %q", res.Header.Get("Location"))
	}
	if res, _ := a.get(d, "/"); res.StatusCode != http.StatusSeeOther || !strings.HasPrefix(res.Header.Get("Location"), "/signin") {
		t.Fatalf("pages before the code: %d %q", res.StatusCode, res.Header.Get("Location"))
	}
	if res := a.postForm(d, "/signin/code", url.Values{"code": {"000000"}}); res.StatusCode != http.StatusUnauthorized {
		t.Fatalf("a wrong code: %d", res.StatusCode)
	}
	code, _ := credential.TOTPCode(secret, clock.Now())
	if res := a.postForm(d, "/signin/code", url.Values{"code": {code}}); res.StatusCode != http.StatusSeeOther || res.Header.Get("Location") != "/" {
		t.Fatalf("the right code: %d to %q", res.StatusCode, res.Header.Get("Location"))
	}
	if res, _ := a.get(d, "/participants"); res.StatusCode != 200 {
		t.Fatalf("signed in with the code: %d", res.StatusCode)
	}
	// The same code again, from another browser: refused (RFC 6238 5.2).
	e := a.client()
	a.signInFrom(e, "192.0.2.3", "investigator@example.org", testPassword)
	if res := a.postForm(e, "/signin/code", url.Values{"code": {code}}); res.StatusCode != http.StatusUnauthorized {
		t.Fatalf("a code used before: %d", res.StatusCode)
	}
	// A recovery code works once, and leads to setting up a new factor.
	if res := a.postForm(e, "/signin/code", url.Values{"code": {codes[3]}}); res.StatusCode != http.StatusSeeOther || res.Header.Get("Location") != "/account/second-factor" {
		t.Fatalf("a recovery code: %d to %q", res.StatusCode, res.Header.Get("Location"))
	}
	f := a.client()
	a.signInFrom(f, "192.0.2.4", "investigator@example.org", testPassword)
	if res := a.postForm(f, "/signin/code", url.Values{"code": {codes[3]}}); res.StatusCode != http.StatusUnauthorized {
		t.Fatalf("a recovery code used before: %d", res.StatusCode)
	}
	// The administrator resets the factor (a lost phone): signed out, set up anew.
	admin := a.client()
	a.signInFrom(admin, "192.0.2.5", "admin@example.org", testPassword)
	a.get(admin, "/account/second-factor") // the administrator also sees PHI: set up first
	enrolOverHTTP(t, a, admin, clock.Now())
	res, body := a.postFormBody(admin, "/admin/users/"+itoa(a.users[cohort.Investigator].ID)+"/second-factor/reset", nil)
	if res.StatusCode != 200 || !strings.Contains(body, "second factor was removed") {
		t.Fatalf("reset: %d", res.StatusCode)
	}
	if res, _ := a.get(d, "/"); res.StatusCode != http.StatusSeeOther {
		t.Errorf("the investigator's session after the reset: %d", res.StatusCode)
	}
}

// TestCodeGuessesAreThrottled: the second step is throttled like passwords.
func TestCodeGuessesAreThrottled(t *testing.T) {
	a, clock := newAppWith(t, Config{})
	cl := a.client()
	a.signInFrom(cl, "192.0.2.1", "coordinator@example.org", testPassword)
	enrolOverHTTP(t, a, cl, clock.Now())
	g := a.client()
	a.signInFrom(g, "192.0.2.9", "coordinator@example.org", testPassword)
	for i := 0; i < credential.Code.Free; i++ {
		if res := a.postForm(g, "/signin/code", url.Values{"code": {"11111" + itoa(int64(i))}}); res.StatusCode != http.StatusUnauthorized {
			t.Fatalf("guess %d: %d", i, res.StatusCode)
		}
	}
	if res := a.postForm(g, "/signin/code", url.Values{"code": {"123123"}}); res.StatusCode != http.StatusTooManyRequests {
		t.Fatalf("guess after the limit: %d, want 429", res.StatusCode)
	}
}

// TestBrowserSecondFactorEnrolmentAndSignIn (issue 14, finding 7): in
// Chromium, an investigator whose role must use a second factor is led from
// sign-in to the set-up page, reads the secret, confirms it with a code the
// test computes, sees the recovery codes, signs out, and signs in again with
// password and code.
func TestBrowserSecondFactorEnrolmentAndSignIn(t *testing.T) {
	a := newApp(t)
	a.exec(`UPDATE sign_in_policy SET second_factor_required = true`)
	tb := newTab(t, a, 90*time.Second)
	tb.b.Do("sign in with the password",
		chromedp.Navigate(tb.base+"/signin"),
		chromedp.WaitVisible(chromedp.ID("email")),
		chromedp.SendKeys(chromedp.ID("email"), "investigator@example.org"),
		chromedp.SendKeys(chromedp.ID("password"), testPassword),
	)
	tb.follow("to the set-up page", `[data-testid="signin-submit"]`, `[data-testid="totp-secret"]`)
	if !tb.has(`[data-testid="second-factor-required"]`) || !tb.has(`img[data-testid="totp-qr"]`) {
		t.Fatal("the set-up page does not say it is required or shows no QR code")
	}
	if w := tb.eval(`String(document.querySelector('[data-testid="totp-qr"]').naturalWidth)`); w != "220" {
		t.Fatalf("the QR image did not load: width %s", w)
	}
	secret := strings.ReplaceAll(tb.b.Text("secret", `[data-testid="totp-secret"]`), " ", "")
	code, err := credential.TOTPCode(secret, time.Now())
	if err != nil {
		t.Fatal(err)
	}
	tb.b.Do("type the code", chromedp.SendKeys(chromedp.ID("code"), code))
	tb.follow("turn it on", `[data-testid="enrol-form"] button`, `[data-testid="recovery-codes"]`)
	if n := tb.eval(`String(document.querySelectorAll('[data-testid="recovery-codes"] li').length)`); n != "10" {
		t.Fatalf("recovery codes shown: %s", n)
	}
	tb.b.Do("go on", chromedp.Navigate(tb.base+"/"), chromedp.WaitVisible(chromedp.CSS(`[data-testid="user-role"]`)))
	tb.signOut()
	tb.b.Do("sign in again",
		chromedp.WaitVisible(chromedp.ID("email")),
		chromedp.SendKeys(chromedp.ID("email"), "investigator@example.org"),
		chromedp.SendKeys(chromedp.ID("password"), testPassword),
	)
	tb.follow("to the code", `[data-testid="signin-submit"]`, `[data-testid="code-form"]`)
	// A new time step, so the code is not the one used to confirm.
	time.Sleep(time.Until(time.Unix((time.Now().Unix()/30+1)*30, 0)) + 200*time.Millisecond)
	code, _ = credential.TOTPCode(secret, time.Now())
	tb.b.Do("type the code", chromedp.SendKeys(chromedp.ID("code"), code))
	tb.follow("sign in with the code", `[data-testid="code-form"] button`, `[data-testid="user-role"]`)
	if !strings.HasSuffix(strings.TrimRight(tb.b.Location(), "/"), strings.TrimRight(tb.base, "/")) {
		t.Errorf("after the code: at %s", tb.b.Location())
	}
}
