package web

import (
	"context"
	"net/http"
	"net/http/httptest"
	"net/netip"
	"net/url"
	"strings"
	"sync"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/credential"
	"cohortdesk/db"
	"cohortdesk/db/dbtest"
)

// testClock is a clock tests move by hand.
type testClock struct {
	mu sync.Mutex
	t  time.Time
}

func (c *testClock) Now() time.Time { c.mu.Lock(); defer c.mu.Unlock(); return c.t }
func (c *testClock) Add(d time.Duration) {
	c.mu.Lock()
	defer c.mu.Unlock()
	c.t = c.t.Add(d)
}

// newAppWith is newApp with a clock the test moves, every address of
// 127.0.0.0/8 a trusted proxy (so X-Forwarded-For names the client), and
// cfg's other fields.
func newAppWith(t *testing.T, cfg Config) (*app, *testClock) {
	t.Helper()
	clock := &testClock{t: time.Date(2026, 3, 2, 9, 0, 0, 0, time.UTC)}
	pool := dbtest.Pool(t)
	store := db.New(pool, clock.Now)
	cfg.Store, cfg.Pool, cfg.Now = store, pool, clock.Now
	if cfg.Password.Memory == 0 {
		cfg.Password = credential.TestParams
	}
	if cfg.Secret == nil {
		cfg.Secret = []byte(testSecret)
	}
	cfg.TrustedProxies = []netip.Prefix{netip.MustParsePrefix("127.0.0.0/8")}
	srv := New(cfg)
	a := &app{t: t, store: store, srv: srv, users: map[cohort.Role]db.User{}}
	a.ts = httptest.NewServer(srv.Handler())
	t.Cleanup(a.ts.Close)
	a.addRoleUsers()
	return a, clock
}

// signInFrom posts the sign-in form as the client at addr (through the
// trusted proxy) and returns the status.
func (a *app) signInFrom(c *http.Client, addr, email, pw string) *http.Response {
	a.t.Helper()
	req, _ := http.NewRequest("POST", a.ts.URL+"/signin", strings.NewReader(url.Values{"email": {email}, "password": {pw}}.Encode()))
	req.Header.Set("Content-Type", "application/x-www-form-urlencoded")
	req.Header.Set("X-Forwarded-For", addr)
	res, err := c.Do(req)
	if err != nil {
		a.t.Fatal(err)
	}
	res.Body.Close()
	return res
}

// TestParallelGuessesNeverExceedTheLimit (issue 14, finding 2): 40 guesses
// at one account sent at once, from 40 addresses, get exactly the 5 tries the
// account's rule allows; the other 35 are refused without a password check.
func TestParallelGuessesNeverExceedTheLimit(t *testing.T) {
	a, _ := newAppWith(t, Config{HashConcurrency: 64})
	const n = 40
	statuses := make([]int, n)
	var wg sync.WaitGroup
	start := make(chan struct{})
	for i := range n {
		wg.Add(1)
		go func() {
			defer wg.Done()
			<-start
			statuses[i] = a.signInFrom(a.client(), "198.51.100."+itoa(int64(i+1)), "investigator@example.org", "a wrong guess "+itoa(int64(i))).StatusCode
		}()
	}
	close(start)
	wg.Wait()
	count := map[int]int{}
	for _, s := range statuses {
		count[s]++
	}
	if count[http.StatusUnauthorized] != credential.Account.Free || count[http.StatusTooManyRequests] != n-credential.Account.Free {
		t.Fatalf("answers %v: want %d tried (401) and %d refused (429)", count, credential.Account.Free, n-credential.Account.Free)
	}
	var tried int
	a.store.Pool().QueryRow(context.Background(), `SELECT count(*) FROM audit_events WHERE action = 'signin.failed'`).Scan(&tried)
	if tried != credential.Account.Free {
		t.Errorf("password checks audited: %d, want %d", tried, credential.Account.Free)
	}
}

// TestRealUserGetsInOnceTheDelayHasPassed (issue 14, finding 2): an attacker
// who keeps guessing while the account is paused does not make the pause
// longer, and the owner, from another address, signs in as soon as it ends.
func TestRealUserGetsInOnceTheDelayHasPassed(t *testing.T) {
	a, clock := newAppWith(t, Config{})
	const attacker, owner = "203.0.113.66", "192.0.2.10"
	email := "coordinator@example.org"
	for i := 1; i <= 5; i++ {
		if s := a.signInFrom(a.client(), attacker, email, "guess").StatusCode; s != http.StatusUnauthorized {
			t.Fatalf("guess %d: %d", i, s)
		}
	}
	// The attacker keeps going for the whole pause, once a second.
	for s := 0; s < 30; s++ {
		if st := a.signInFrom(a.client(), attacker, email, "guess").StatusCode; st != http.StatusTooManyRequests {
			t.Fatalf("guess during the pause at +%ds: %d", s, st)
		}
		clock.Add(time.Second)
	}
	row, _ := a.store.Throttled(context.Background(), accountKey(email))
	if row.Failures != 5 || row.Refused != 30 || row.LockedUntil == nil || !row.LockedUntil.Equal(clock.Now()) {
		t.Fatalf("throttle after the pause: %+v (now %v): refused guesses must not extend it", row, clock.Now())
	}
	if res := a.signInFrom(a.client(), owner, email, testPassword); res.StatusCode != http.StatusSeeOther {
		t.Fatalf("the owner once the pause has passed: %d, want a redirect into the app", res.StatusCode)
	}
	// Signing in cleared the account's failures (NIST SP 800-63B 5.2.2).
	if row, _ := a.store.Throttled(context.Background(), accountKey(email)); row.Failures != 0 {
		t.Errorf("failures after the owner's sign-in: %d", row.Failures)
	}
}

// TestTrustedDeviceGetsInDuringAnAttack: the owner's browser, which signed in
// before, is not paused by an attacker's guesses at the account.
func TestTrustedDeviceGetsInDuringAnAttack(t *testing.T) {
	a, _ := newAppWith(t, Config{})
	email := "investigator@example.org"
	owner := a.client()
	if res := a.signInFrom(owner, "192.0.2.10", email, testPassword); res.StatusCode != http.StatusSeeOther {
		t.Fatalf("first sign-in: %d", res.StatusCode)
	}
	a.postForm(owner, "/signout", nil)
	for i := 0; i < 12; i++ {
		a.signInFrom(a.client(), "203.0.113.66", email, "guess")
	}
	if s := a.signInFrom(a.client(), "192.0.2.11", email, testPassword).StatusCode; s != http.StatusTooManyRequests {
		t.Fatalf("a new browser during the attack: %d, want 429", s)
	}
	if s := a.signInFrom(owner, "192.0.2.10", email, testPassword).StatusCode; s != http.StatusSeeOther {
		t.Fatalf("the owner's own browser during the attack: %d, want a redirect into the app", s)
	}
	// The cookie is worth nothing for another account.
	if s := a.signInFrom(owner, "192.0.2.10", "coordinator@example.org", "guess").StatusCode; s != http.StatusUnauthorized {
		t.Fatalf("another account from that browser: %d", s)
	}
	if row, _ := a.store.Throttled(context.Background(), accountKey("coordinator@example.org")); row.Failures != 1 {
		t.Errorf("the other account's failures: %d, want 1 (the device cookie does not cover it)", row.Failures)
	}
}

// TestAddressLimitAcrossAccounts (issue 14, finding 2): one address guessing
// one password at many accounts is paused after 30 failures, whatever the
// account; other addresses are not.
func TestAddressLimitAcrossAccounts(t *testing.T) {
	a, _ := newAppWith(t, Config{})
	const sprayer = "203.0.113.9"
	for i := 1; i <= credential.Address.Free; i++ {
		if s := a.signInFrom(a.client(), sprayer, "person"+itoa(int64(i))+"@example.org", "Spring2026!").StatusCode; s != http.StatusUnauthorized {
			t.Fatalf("spray %d: %d", i, s)
		}
	}
	if s := a.signInFrom(a.client(), sprayer, "monitor@example.org", testPassword).StatusCode; s != http.StatusTooManyRequests {
		t.Fatalf("from the spraying address: %d, want 429", s)
	}
	if s := a.signInFrom(a.client(), "192.0.2.44", "monitor@example.org", testPassword).StatusCode; s != http.StatusSeeOther {
		t.Fatalf("from another address: %d", s)
	}
}

// TestOverlongEmailIsRefusedBeforeAnythingIsStored (issue 14, finding 4): an
// e-mail address over 254 characters is refused with 422 and leaves no trace
// in the audit trail or the throttle table.
func TestOverlongEmailIsRefusedBeforeAnythingIsStored(t *testing.T) {
	a := newApp(t)
	ctx := context.Background()
	count := func() (audit, throttle int) {
		a.store.Pool().QueryRow(ctx, `SELECT count(*) FROM audit_events`).Scan(&audit)
		a.store.Pool().QueryRow(ctx, `SELECT count(*) FROM sign_in_throttle`).Scan(&throttle)
		return
	}
	audit0, thr0 := count()
	for _, n := range []int{255, 2800, 12000} {
		email := strings.Repeat("x", n-len("@example.org")) + "@example.org"
		res, body := a.postFormBody(a.client(), "/signin", url.Values{"email": {email}, "password": {"whatever"}})
		if res.StatusCode != http.StatusUnprocessableEntity || !strings.Contains(body, "at most 254 characters") {
			t.Errorf("%d characters: status %d", n, res.StatusCode)
		}
	}
	if audit1, thr1 := count(); audit1 != audit0 || thr1 != thr0 {
		t.Errorf("rows added: audit %d, throttle %d; want none", audit1-audit0, thr1-thr0)
	}
	ok := strings.Repeat("y", 254-len("@example.org")) + "@example.org"
	if res := a.postForm(a.client(), "/signin", url.Values{"email": {ok}, "password": {"whatever"}}); res.StatusCode != http.StatusUnauthorized {
		t.Errorf("254 characters: status %d, want the ordinary 401", res.StatusCode)
	}
}

// TestThrottledAttemptsAreCountedNotLogged (issue 14, finding 4): 200
// attempts at a paused account add one counter, not 200 audit rows.
func TestThrottledAttemptsAreCountedNotLogged(t *testing.T) {
	a := newApp(t)
	ctx := context.Background()
	c := a.client()
	for i := 0; i < credential.Account.Free; i++ {
		a.postForm(c, "/signin", url.Values{"email": {"monitor@example.org"}, "password": {"wrong"}})
	}
	var before, after int
	a.store.Pool().QueryRow(ctx, `SELECT count(*) FROM audit_events`).Scan(&before)
	for i := 0; i < 200; i++ {
		if res := a.postForm(c, "/signin", url.Values{"email": {"monitor@example.org"}, "password": {"wrong"}}); res.StatusCode != http.StatusTooManyRequests {
			t.Fatalf("attempt %d: %d", i, res.StatusCode)
		}
	}
	a.store.Pool().QueryRow(ctx, `SELECT count(*) FROM audit_events`).Scan(&after)
	if after != before {
		t.Errorf("200 refused attempts wrote %d audit rows", after-before)
	}
	if row, _ := a.store.Throttled(ctx, accountKey("monitor@example.org")); row.Refused != 200 {
		t.Errorf("refused counter %d, want 200", row.Refused)
	}
}
