package web

import (
	"bufio"
	"context"
	"fmt"
	"io"
	"mime/multipart"
	"net"
	"net/http"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/db"
)

// slowUpload posts a readings CSV to /imports as c, sending the first part at
// once and then one byte every 20 ms until stop closes, then the rest. The
// answer's status arrives on the returned channel.
func slowUpload(t *testing.T, a *app, c *http.Client, name, csv string, stop <-chan struct{}) <-chan int {
	t.Helper()
	pr, pw := io.Pipe()
	mw := multipart.NewWriter(pw)
	go func() {
		_ = mw.WriteField("kind", db.ImportReadingsCSV)
		fw, _ := mw.CreateFormFile("file", name)
		half := len(csv) / 2
		_, _ = io.WriteString(fw, csv[:half])
		rest := csv[half:]
		for len(rest) > 1 {
			select {
			case <-stop:
				_, _ = io.WriteString(fw, rest)
				rest = ""
				continue
			case <-time.After(20 * time.Millisecond):
			}
			_, _ = io.WriteString(fw, rest[:1])
			rest = rest[1:]
		}
		_, _ = io.WriteString(fw, rest)
		pw.CloseWithError(mw.Close())
	}()
	out := make(chan int, 1)
	go func() {
		res, err := c.Post(a.ts.URL+"/imports", mw.FormDataContentType(), pr)
		if err != nil {
			out <- -1
			return
		}
		io.Copy(io.Discard, res.Body)
		res.Body.Close()
		out <- res.StatusCode
	}()
	return out
}

func readingsCSV(sid string, n int, offset int) string {
	var b strings.Builder
	b.WriteString("study_id,time,kind,value,end_time\n")
	t0 := time.Date(2026, 3, 3, 8, 0, 0, 0, time.UTC)
	for i := 0; i < n; i++ {
		fmt.Fprintf(&b, "%s,%s,heart_rate,%d,\n", sid, t0.Add(time.Duration(offset+i)*time.Minute).Format(time.RFC3339), 60+i%20)
	}
	return b.String()
}

// TestSlowUploadBlocksNoOtherImportOrPage (issue 14, finding 8): while one
// coordinator's upload trickles in, byte by byte, another person's import
// runs to the end and pages answer; the trickling upload holds no database
// lock or transaction meanwhile, shows on the imports list with the bytes
// received, and is imported once it has arrived.
func TestSlowUploadBlocksNoOtherImportOrPage(t *testing.T) {
	a := newApp(t)
	a.exec(`INSERT INTO sites (code, name) VALUES ('AA', 'Site A')`)
	a.exec(`INSERT INTO participants (study_id, site_id, time_zone, enrolled_on) VALUES ('P-1', 1, 'UTC', '2026-03-02'), ('P-2', 1, 'UTC', '2026-03-02')`)
	slow := a.signIn(cohort.Coordinator)
	stop := make(chan struct{})
	slowDone := slowUpload(t, a, slow, "slow.csv", readingsCSV("P-1", 200, 0), stop)
	ctx := context.Background()
	// Wait until the slow upload is on the list, receiving.
	waitImports(t, a, `status = 'running' AND bytes_read > 0`, 1, stop)
	var locks, inTx int
	a.store.Pool().QueryRow(ctx, `SELECT count(*) FROM pg_locks WHERE locktype = 'advisory'`).Scan(&locks)
	a.store.Pool().QueryRow(ctx, `SELECT count(*) FROM pg_stat_activity WHERE datname = current_database() AND state LIKE 'idle in transaction%'`).Scan(&inTx)
	if locks != 0 || inTx != 0 {
		t.Errorf("while the body trickles in: %d advisory locks, %d idle transactions; want none", locks, inTx)
	}

	// Another person's import and a page, meanwhile.
	other := a.signIn(cohort.Admin)
	fast := make(chan int, 1)
	go func() {
		res, _ := upload(t, a, other, "readings_csv", "fast.csv", readingsCSV("P-2", 50, 0))
		fast <- res.StatusCode
	}()
	select {
	case st := <-fast:
		if st != 200 {
			t.Errorf("the other import: status %d", st)
		}
	case <-time.After(2 * time.Minute):
		close(stop)
		t.Fatal("the other import waited for the slow upload")
	}
	if res, _ := a.get(other, "/participants"); res.StatusCode != 200 {
		t.Errorf("/participants during the slow upload: %d", res.StatusCode)
	}
	select {
	case st := <-slowDone:
		t.Fatalf("the slow upload ended (%d) before it was let go: the test proved nothing", st)
	default:
	}
	close(stop)
	if st := <-slowDone; st != http.StatusSeeOther {
		t.Fatalf("the slow upload: status %d", st)
	}
	var statuses string
	var accepted int64
	a.store.Pool().QueryRow(ctx, `SELECT string_agg(status, ',' ORDER BY id), sum(accepted) FROM imports`).Scan(&statuses, &accepted)
	if statuses != "done,done" || accepted != 250 {
		t.Errorf("imports %q with %d readings, want done,done with 250", statuses, accepted)
	}
}

// TestUploadsPerPersonAreLimited (issue 14, finding 8): a person with two
// uploads in progress is refused a third (429); someone else is not.
func TestUploadsPerPersonAreLimited(t *testing.T) {
	a := newApp(t)
	a.exec(`INSERT INTO sites (code, name) VALUES ('AA', 'Site A')`)
	a.exec(`INSERT INTO participants (study_id, site_id, time_zone, enrolled_on) VALUES ('P-1', 1, 'UTC', '2026-03-02')`)
	c := a.signIn(cohort.Coordinator)
	stop := make(chan struct{})
	first := slowUpload(t, a, c, "one.csv", readingsCSV("P-1", 100, 0), stop)
	second := slowUpload(t, a, c, "two.csv", readingsCSV("P-1", 100, 100), stop)
	waitImports(t, a, `status = 'running'`, 2, stop)
	res, body := upload(t, a, c, "readings_csv", "three.csv", readingsCSV("P-1", 10, 300))
	if res.StatusCode != http.StatusTooManyRequests || !strings.Contains(body, "uploads in progress") {
		t.Errorf("a third upload: status %d", res.StatusCode)
	}
	if res, _ := upload(t, a, a.signIn(cohort.Admin), "readings_csv", "admin.csv", readingsCSV("P-1", 10, 400)); res.StatusCode != 200 {
		t.Errorf("another person's upload: status %d", res.StatusCode)
	}
	close(stop)
	if s1, s2 := <-first, <-second; s1 != http.StatusSeeOther || s2 != http.StatusSeeOther {
		t.Fatalf("the two uploads: %d, %d", s1, s2)
	}
	if res, _ := upload(t, a, c, "readings_csv", "four.csv", readingsCSV("P-1", 10, 500)); res.StatusCode != 200 {
		t.Errorf("after they finished: status %d", res.StatusCode)
	}
}

// TestSignInBodyHasSecondsToArrive (issue 14, finding 8): a sign-in whose body
// stalls is cut off after the sign-in route's read timeout, seconds; an
// upload route allows minutes.
func TestSignInBodyHasSecondsToArrive(t *testing.T) {
	if readTimeout("POST", "/signin") > 15*time.Second || readTimeout("POST", "/imports") < 10*time.Minute ||
		readTimeout("POST", "/cases/{id}/recordings") < 10*time.Minute || readTimeout("POST", "/participants") > 5*time.Minute {
		t.Fatalf("read timeouts: sign-in %v, imports %v, recordings %v, forms %v", readTimeout("POST", "/signin"),
			readTimeout("POST", "/imports"), readTimeout("POST", "/cases/{id}/recordings"), readTimeout("POST", "/participants"))
	}
	a := newApp(t)
	srv := httpServerFor(t, a)
	conn, err := net.Dial("tcp", srv)
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close()
	fmt.Fprintf(conn, "POST /signin HTTP/1.1\r\nHost: %s\r\nContent-Type: application/x-www-form-urlencoded\r\nContent-Length: 200\r\n\r\nemail=x", srv)
	start := time.Now()
	conn.SetReadDeadline(time.Now().Add(2 * time.Minute))
	res, err := http.ReadResponse(bufio.NewReader(conn), nil)
	if err == nil {
		res.Body.Close()
	}
	// Either an answer refusing the unfinished form or a closed connection,
	// and well before the two minutes.
	if waited := time.Since(start); waited > time.Minute {
		t.Fatalf("the stalled sign-in held the connection %v", waited)
	}
}

// httpServerFor serves a's handler with the production server settings
// (NewHTTPServer) on a loopback port and returns its address.
func httpServerFor(t *testing.T, a *app) string {
	t.Helper()
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	hs := NewHTTPServer(ln.Addr().String(), a.srv.Handler())
	go hs.Serve(ln)
	t.Cleanup(func() { hs.Close() })
	return ln.Addr().String()
}

// waitImports waits (a minute at most) until n imports match where; on
// failure it lets the slow uploads go (stop) and fails the test.
func waitImports(t *testing.T, a *app, where string, n int, stop chan struct{}) {
	t.Helper()
	deadline := time.Now().Add(time.Minute)
	for {
		var got int
		a.store.Pool().QueryRow(context.Background(), `SELECT count(*) FROM imports WHERE `+where).Scan(&got)
		if got == n {
			return
		}
		if time.Now().After(deadline) {
			close(stop)
			t.Fatalf("%d imports %s, want %d", got, where, n)
		}
		time.Sleep(50 * time.Millisecond)
	}
}
