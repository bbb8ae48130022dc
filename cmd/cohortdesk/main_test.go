package main

import (
	"context"
	"io"
	"net/http"
	"net/http/cookiejar"
	"net/url"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"

	"cohortdesk/cmd/cohortdesk/demoload"
	"cohortdesk/cohort"
	"cohortdesk/cohort/credential"
	"cohortdesk/db"
	"cohortdesk/db/dbtest"
)

// syncBuffer collects a command's output while it runs.
type syncBuffer = dbtest.LogBuffer

// TestDemoCommandEndToEnd runs the README's demo command on a free port with a
// small cohort: it creates its private cluster, loads the study, serves, shows
// non-zero counts after sign-in, and stops cleanly (web server, then
// PostgreSQL) when cancelled. A second run reuses the data.
func TestDemoCommandEndToEnd(t *testing.T) {
	dir, err := os.MkdirTemp("", "cohortdesk-demo-test-")
	if err != nil {
		t.Fatal(err)
	}
	os.Chmod(dir, 0o755)
	defer os.RemoveAll(dir)
	var secret, deactivated string
	for pass := 1; pass <= 2; pass++ {
		ctx, cancel := context.WithCancel(context.Background())
		var out, errs syncBuffer
		done := make(chan error, 1)
		go func() {
			done <- run(ctx, []string{"demo", "-data", dir, "-addr", "127.0.0.1:0", "-participants", "12"}, os.Getenv, &out, &errs)
		}()
		addrRE := regexp.MustCompile(`running at (http://[0-9.:]+)/`)
		var base string
		deadline := time.Now().Add(3 * time.Minute)
		for base == "" {
			if m := addrRE.FindStringSubmatch(out.String()); m != nil {
				base = m[1]
				break
			}
			select {
			case err := <-done:
				t.Fatalf("pass %d: demo exited early: %v\n%s\n%s", pass, err, out.String(), errs.String())
			case <-time.After(100 * time.Millisecond):
			}
			if time.Now().After(deadline) {
				cancel()
				t.Fatalf("pass %d: demo did not start:\n%s", pass, errs.String())
			}
		}
		if !strings.Contains(out.String(), demoload.DemoPassword) {
			t.Errorf("pass %d: the demo sign-in is not printed:\n%s", pass, out.String())
		}
		res, err := http.Get(base + "/ready")
		if err != nil || res.StatusCode != 200 {
			t.Fatalf("pass %d: ready %v %v", pass, res, err)
		}
		res.Body.Close()
		email := regexp.MustCompile(`([a-z]+@example\.net)\s+Coordinator`).FindStringSubmatch(out.String())
		if email == nil {
			t.Fatalf("no coordinator account printed:\n%s", out.String())
		}
		jar, _ := cookiejar.New(nil)
		c := &http.Client{Jar: jar}
		res, err = c.PostForm(base+"/signin", url.Values{"email": {email[1]}, "password": {demoload.DemoPassword}})
		if err != nil {
			t.Fatal(err)
		}
		body, _ := io.ReadAll(res.Body)
		res.Body.Close()
		if !regexp.MustCompile(`data-testid="tile-participants"><div class="num">1[0-9]<`).Match(body) {
			t.Fatalf("pass %d: home page after sign-in lacks the participant count:\n%.2000s", pass, body)
		}
		// The app runs as the unprivileged application role (issue 14,
		// finding 5), and the printed URL is that role's.
		dbURL := regexp.MustCompile(`DATABASE_URL='([^']+)'`).FindStringSubmatch(out.String())
		if dbURL == nil || !strings.Contains(dbURL[1], db.AppRole+"@") {
			t.Fatalf("pass %d: printed database URL %v is not the application role's", pass, dbURL)
		}
		if pass == 1 {
			// An administrator deactivates a demo account and adds one with
			// the demo password: the next run must advertise neither (issue
			// 14, finding 15).
			pool, err := db.Open(context.Background(), dbURL[1], 2)
			if err != nil {
				t.Fatal(err)
			}
			store := db.New(pool, nil)
			admin, err := store.UserForSignIn(context.Background(), regexp.MustCompile(`([a-z]+@example\.net)\s+Administrator`).FindStringSubmatch(out.String())[1])
			if err != nil {
				t.Fatal(err)
			}
			hash, _ := credential.Hash(demoload.DemoPassword, credential.TestParams)
			if _, err := store.CreateUser(context.Background(), admin.Actor("127.0.0.1", ""), db.NewUser{Email: "added@example.net", Name: "Added Later", Role: cohort.Monitor, PasswordHash: hash}); err != nil {
				t.Fatal(err)
			}
			if _, err := pool.Exec(context.Background(), `UPDATE users SET active = false WHERE email = $1`, email[1]); err != nil {
				t.Fatal(err)
			}
			deactivated = email[1]
			pool.Close()
		} else if strings.Contains(out.String(), "added@example.net") || strings.Contains(out.String(), deactivated) {
			t.Errorf("pass 2 advertises an account added by an administrator or a deactivated one:\n%s", out.String())
		}
		cancel()
		select {
		case err := <-done:
			if err != nil {
				t.Fatalf("pass %d: demo stopped with %v", pass, err)
			}
		case <-time.After(time.Minute):
			t.Fatalf("pass %d: demo did not stop", pass)
		}
		if !strings.Contains(errs.String(), "postgres stopped") {
			t.Errorf("pass %d: PostgreSQL was not stopped cleanly:\n%s", pass, errs.String())
		}
		if pass == 2 && strings.Contains(errs.String(), "fictional cohort loaded") {
			t.Error("the second run loaded the cohort again")
		}
		// The demo keeps a random deployment secret in its data folder,
		// readable by its owner only, the same on the second run.
		st, err := os.Stat(filepath.Join(dir, demoSecretFile))
		if err != nil || st.Mode().Perm() != 0o600 {
			t.Fatalf("pass %d: secret file: %v, mode %v", pass, err, st)
		}
		b, _ := os.ReadFile(filepath.Join(dir, demoSecretFile))
		if len(strings.TrimSpace(string(b))) < 32 || (pass == 2 && string(b) != secret) {
			t.Errorf("pass %d: secret %d characters, changed %v", pass, len(b), pass == 2 && string(b) != secret)
		}
		secret = string(b)
	}
}
