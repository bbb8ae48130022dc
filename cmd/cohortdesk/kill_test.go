package main

import (
	"bufio"
	"context"
	"fmt"
	"io"
	"mime/multipart"
	"net/http"
	"net/http/cookiejar"
	"net/url"
	"os"
	"os/exec"
	"os/signal"
	"regexp"
	"strings"
	"syscall"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/credential"
	"cohortdesk/db"
	"cohortdesk/db/dbtest"
)

const serveChildEnv = "COHORTDESK_SERVE_CHILD"

// TestServeChild is the server process the kill test starts, kills and
// starts again: the real serve command on a free loopback port. It does
// nothing in a normal run.
func TestServeChild(t *testing.T) {
	if os.Getenv(serveChildEnv) == "" {
		return
	}
	ctx, stop := signal.NotifyContext(context.Background(), syscall.SIGTERM, os.Interrupt)
	defer stop()
	if err := run(ctx, []string{"serve", "-addr", "127.0.0.1:0", "-workers", "0"}, os.Getenv, os.Stdout, os.Stderr); err != nil {
		t.Fatal(err)
	}
}

// serverProcess is a serve command running in a child process.
type serverProcess struct {
	cmd  *exec.Cmd
	base string
	done chan struct{}
	log  *syncBuffer
}

var listeningRE = regexp.MustCompile(`msg=listening addr=(127\.0\.0\.1:[0-9]+)`)

// startServer starts the serve command in a child process against url and
// waits until it listens.
func startServer(t *testing.T, url string) *serverProcess {
	t.Helper()
	cmd := exec.Command(os.Args[0], "-test.run=^TestServeChild$", "-test.count=1")
	cmd.Env = append(os.Environ(), serveChildEnv+"=1", "DATABASE_URL="+url,
		"COHORTDESK_SECRET=a test secret that is long enough for the check", "COHORTDESK_LOG_LEVEL=info")
	stderr, err := cmd.StderrPipe()
	if err != nil {
		t.Fatal(err)
	}
	p := &serverProcess{cmd: cmd, done: make(chan struct{}), log: &syncBuffer{}}
	cmd.Stdout = p.log
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	addr := make(chan string, 1)
	go func() {
		defer close(p.done)
		sc := bufio.NewScanner(stderr)
		for sc.Scan() {
			line := sc.Text()
			p.log.Write([]byte(line + "\n"))
			if m := listeningRE.FindStringSubmatch(line); m != nil {
				select {
				case addr <- m[1]:
				default:
				}
			}
		}
		_ = cmd.Wait()
	}()
	select {
	case a := <-addr:
		p.base = "http://" + a
	case <-p.done:
		t.Fatalf("the server exited before listening:\n%s", p.log.String())
	case <-time.After(2 * time.Minute):
		_ = cmd.Process.Kill()
		t.Fatalf("the server did not listen within 2 minutes:\n%s", p.log.String())
	}
	return p
}

// stop ends the process with sig and waits for it.
func (p *serverProcess) stop(t *testing.T, sig syscall.Signal) {
	t.Helper()
	if err := p.cmd.Process.Signal(sig); err != nil {
		t.Fatal(err)
	}
	select {
	case <-p.done:
	case <-time.After(time.Minute):
		_ = p.cmd.Process.Kill()
		t.Fatalf("the server did not stop after %v:\n%s", sig, p.log.String())
	}
}

// signedIn returns an HTTP client signed in to the server as the coordinator.
func (p *serverProcess) signedIn(t *testing.T, email, password string) *http.Client {
	t.Helper()
	jar, _ := cookiejar.New(nil)
	c := &http.Client{Jar: jar, Timeout: 2 * time.Minute,
		CheckRedirect: func(*http.Request, []*http.Request) error { return http.ErrUseLastResponse }}
	res, err := c.PostForm(p.base+"/signin", url.Values{"email": {email}, "password": {password}})
	if err != nil {
		t.Fatal(err)
	}
	res.Body.Close()
	if res.StatusCode != http.StatusSeeOther {
		t.Fatalf("sign in: status %d", res.StatusCode)
	}
	return c
}

// trickle hands out a file slowly, like an upload over a slow line, so the
// server can be killed in the middle of it.
type trickle struct {
	r     io.Reader
	chunk int
	pause time.Duration
}

func (s trickle) Read(p []byte) (int, error) {
	if len(p) > s.chunk {
		p = p[:s.chunk]
	}
	time.Sleep(s.pause)
	return s.r.Read(p)
}

// upload posts file through the import form as a streamed multipart body and
// returns the response (or the transport error when the server dies).
func upload(c *http.Client, base, name string, file io.Reader) (*http.Response, error) {
	pr, pw := io.Pipe()
	mw := multipart.NewWriter(pw)
	go func() {
		err := mw.WriteField("kind", db.ImportReadingsCSV)
		if err == nil {
			var fw io.Writer
			if fw, err = mw.CreateFormFile("file", name); err == nil {
				if _, err = io.Copy(fw, file); err == nil {
					err = mw.Close()
				}
			}
		}
		pw.CloseWithError(err)
	}()
	res, err := c.Post(base+"/imports", mw.FormDataContentType(), pr)
	pr.CloseWithError(io.ErrClosedPipe) // stop the writer if the server went away
	return res, err
}

// heartRateCSV makes n heart-rate readings for each participant every 10 s
// from start.
func heartRateCSV(ids []string, n int, start time.Time) string {
	var b strings.Builder
	b.WriteString("study_id,time,kind,value\n")
	for _, id := range ids {
		for i := 0; i < n; i++ {
			fmt.Fprintf(&b, "%s,%s,heart_rate,%d\n", id, start.Add(time.Duration(i)*10*time.Second).Format(time.RFC3339), 58+i%11)
		}
	}
	return b.String()
}

// TestServerKilledDuringUpload kills (SIGKILL) the real server process while a
// large file is being uploaded through the import form, then starts it again:
// nothing of the file is stored (no readings, no refused rows), the import is
// marked interrupted by the new process at start-up once its heartbeat is
// stale, and uploading the file again stores it exactly once; a third upload
// changes nothing.
func TestServerKilledDuringUpload(t *testing.T) {
	url := dbtest.URL(t)
	ctx := context.Background()
	pool, err := db.Open(ctx, url, 4)
	if err != nil {
		t.Fatal(err)
	}
	defer pool.Close()
	store := db.New(pool, nil)
	hash, err := credential.Hash("a coordinator's test password", credential.TestParams)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := store.CreateUser(ctx, cohort.System, db.NewUser{Email: "coordinator@example.org", Name: "Test Coordinator", Role: cohort.Coordinator, PasswordHash: hash}); err != nil {
		t.Fatal(err)
	}
	enrolled := cohort.DateOf(time.Now().UTC().AddDate(0, 0, -30))
	dbtest.AddParticipant(t, pool, "KL-1", enrolled)
	dbtest.AddParticipant(t, pool, "KL-2", enrolled)
	const perParticipant = 20000
	file := heartRateCSV([]string{"KL-1", "KL-2"}, perParticipant, dbtest.WeekStart(enrolled, 0))
	stored := func() (readings, rejects int64, statuses string) {
		t.Helper()
		if err := pool.QueryRow(ctx, `SELECT (SELECT coalesce(sum(n), 0) FROM wear_weeks), (SELECT count(*) FROM import_rejects),
			(SELECT coalesce(string_agg(status, ',' ORDER BY id), '') FROM imports)`).Scan(&readings, &rejects, &statuses); err != nil {
			t.Fatal(err)
		}
		return
	}

	srv := startServer(t, url)
	c := srv.signedIn(t, "coordinator@example.org", "a coordinator's test password")
	uploadDone := make(chan error, 1)
	go func() {
		res, err := upload(c, srv.base, "week.csv", trickle{r: strings.NewReader(file), chunk: 8 << 10, pause: 20 * time.Millisecond})
		if err == nil {
			res.Body.Close()
			err = fmt.Errorf("the upload finished with status %d before the kill", res.StatusCode)
		}
		uploadDone <- err
	}()
	// The import's heartbeat reports progress once a second; kill once a
	// quarter of the file is in.
	deadline := time.Now().Add(time.Minute)
	for {
		var read int64
		_ = pool.QueryRow(ctx, `SELECT coalesce(max(bytes_read), 0) FROM imports WHERE status = 'running'`).Scan(&read)
		if read > int64(len(file))/4 {
			break
		}
		if time.Now().After(deadline) {
			srv.stop(t, syscall.SIGKILL)
			t.Fatalf("the upload never got going:\n%s", srv.log.String())
		}
		time.Sleep(50 * time.Millisecond)
	}
	srv.stop(t, syscall.SIGKILL)
	if err := <-uploadDone; err == nil || strings.Contains(err.Error(), "before the kill") {
		t.Fatalf("upload: %v", err)
	}
	// PostgreSQL rolls back the dead server's transaction when it notices the
	// connection is gone.
	for i := 0; i < 200; i++ {
		var n int
		_ = pool.QueryRow(ctx, `SELECT count(*) FROM pg_stat_activity WHERE datname = current_database() AND pid <> pg_backend_pid()
			AND state IN ('active', 'idle in transaction', 'idle in transaction (aborted)')`).Scan(&n)
		if n == 0 {
			break
		}
		time.Sleep(50 * time.Millisecond)
	}
	if readings, rejects, statuses := stored(); readings != 0 || rejects != 0 || statuses != "running" {
		t.Fatalf("after the kill: %d readings, %d refused rows stored, imports %q; want nothing and one import still marked running", readings, rejects, statuses)
	}

	// Two minutes without a heartbeat make an import interrupted; the new
	// process marks it so at start-up.
	if _, err := pool.Exec(ctx, `UPDATE imports SET heartbeat_at = now() - interval '3 minutes' WHERE status = 'running'`); err != nil {
		t.Fatal(err)
	}
	srv = startServer(t, url)
	defer srv.stop(t, syscall.SIGTERM)
	if _, _, statuses := stored(); statuses != "interrupted" {
		t.Fatalf("after the restart the import is %q, want interrupted", statuses)
	}
	c = srv.signedIn(t, "coordinator@example.org", "a coordinator's test password")
	want := int64(2 * perParticipant)
	for pass, wantStatuses := range []string{"interrupted,done", "interrupted,done,done"} {
		res, err := upload(c, srv.base, "week.csv", strings.NewReader(file))
		if err != nil {
			t.Fatal(err)
		}
		res.Body.Close()
		if res.StatusCode != http.StatusSeeOther || !strings.HasPrefix(res.Header.Get("Location"), "/imports/") {
			t.Fatalf("upload %d: status %d, location %q", pass+2, res.StatusCode, res.Header.Get("Location"))
		}
		readings, rejects, statuses := stored()
		if readings != want || rejects != 0 || statuses != wantStatuses {
			t.Fatalf("upload %d: %d readings stored, %d refused, imports %q; want %d, 0, %q", pass+2, readings, rejects, statuses, want, wantStatuses)
		}
	}
	var accepted, duplicates int64
	if err := pool.QueryRow(ctx, `SELECT accepted, duplicates FROM imports ORDER BY id DESC LIMIT 1`).Scan(&accepted, &duplicates); err != nil {
		t.Fatal(err)
	}
	if accepted != 0 || duplicates != want {
		t.Errorf("the repeated upload accepted %d and skipped %d, want 0 and %d", accepted, duplicates, want)
	}
}
