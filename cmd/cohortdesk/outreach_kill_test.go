package main

import (
	"context"
	"os"
	"os/exec"
	"os/signal"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
	"cohortdesk/cohort/outreach"
	"cohortdesk/db"
	"cohortdesk/db/dbtest"
	"cohortdesk/web/outreach/smtptest"
)

const outreachChildEnv = "COHORTDESK_OUTREACH_CHILD"

// TestOutreachServeChild is the server the outbox kill test starts, kills
// and starts again: the real serve command with one background worker,
// sending e-mail through the test's mail server. It does nothing in a normal
// run.
func TestOutreachServeChild(t *testing.T) {
	if os.Getenv(outreachChildEnv) == "" {
		return
	}
	ctx, stop := signal.NotifyContext(context.Background(), syscall.SIGTERM, os.Interrupt)
	defer stop()
	if err := run(ctx, []string{"serve", "-addr", "127.0.0.1:0", "-workers", "1"}, os.Getenv, os.Stdout, os.Stderr); err != nil {
		t.Fatal(err)
	}
}

// TestWorkerKilledBetweenSendingAndRecording kills (SIGKILL) the real serve
// process after the mail server has stored a message and before the sender
// has recorded it (the server holds back its "250" for an hour), then starts
// the process again once the job's lease has run out. The documented
// behaviour: nothing is lost and nothing is duplicated silently. The message
// is sent again, with the same Message-ID (so the recipient's mail system can
// tell the copies are one message), and recorded as sent on its second try,
// marked as resent, which the case timeline shows.
func TestWorkerKilledBetweenSendingAndRecording(t *testing.T) {
	url := dbtest.URL(t)
	ctx := context.Background()
	pool, err := db.Open(ctx, url, 4)
	if err != nil {
		t.Fatal(err)
	}
	defer pool.Close()
	store := db.New(pool, nil)
	cases := dbtest.OutreachCases(t, store, 1)
	mailbox := smtptest.Start(t, smtptest.Options{})
	mailbox.SetMode(smtptest.SlowAck)
	// Quiet hours off, whatever the hour the test runs at.
	var pid int64
	pool.QueryRow(ctx, `SELECT participant_id FROM cases WHERE id = $1`, cases[0]).Scan(&pid)
	p := outreach.Defaults()
	p.QuietFrom, p.QuietUntil = 0, 0
	coord := cohort.Actor{Name: "Test Coordinator", Role: cohort.Coordinator}
	if _, err := store.SaveContactPreferences(ctx, coord, pid, 0, p); err != nil {
		t.Fatal(err)
	}
	q, err := store.QueueMessage(ctx, coord, cases[0], db.MessageInput{Version: 1, Purpose: outreach.PurposeFirstContact, Channel: followup.ChannelEmail})
	if err != nil {
		t.Fatal(err)
	}

	start := func() (*exec.Cmd, *syncBuffer) {
		cmd := exec.Command(os.Args[0], "-test.run=^TestOutreachServeChild$", "-test.count=1")
		var log syncBuffer
		cmd.Env = append(os.Environ(), outreachChildEnv+"=1", "DATABASE_URL="+url,
			"COHORTDESK_SECRET=a test secret that is long enough for the check",
			"COHORTDESK_SMTP_HOST="+mailbox.Host, "COHORTDESK_SMTP_PORT="+strconv.Itoa(mailbox.Port),
			"COHORTDESK_SMTP_SECURITY=none", "COHORTDESK_SMTP_FROM=Study team <team@riverside.example.org>")
		cmd.Stdout, cmd.Stderr = &log, &log
		if err := cmd.Start(); err != nil {
			t.Fatal(err)
		}
		return cmd, &log
	}
	first, log1 := start()
	got := mailbox.Wait(1, 2*time.Minute)
	// The message is in the mailbox; the sender waits for the "250".
	if err := first.Process.Kill(); err != nil {
		t.Fatal(err)
	}
	_ = first.Wait()
	m, err := store.Message(ctx, q.ID)
	if err != nil {
		t.Fatal(err)
	}
	if m.Status != outreach.Queued || m.Tries != 1 {
		t.Fatalf("after the kill: %s, %d tries (want queued, 1: the end of the try unrecorded)\n%s", m.Status, m.Tries, log1.String())
	}
	// The dead worker's lease runs out (30 s in production; here at once).
	if _, err := pool.Exec(ctx, `UPDATE jobs SET lease_until = clock_timestamp() - interval '1 second' WHERE kind = $1 AND state = 'running'`, db.JobSendMessage); err != nil {
		t.Fatal(err)
	}
	mailbox.SetMode(smtptest.Accept)
	second, log2 := start()
	deadline := time.Now().Add(2 * time.Minute)
	for {
		m, err = store.Message(ctx, q.ID)
		if err != nil {
			t.Fatal(err)
		}
		if m.Status != outreach.Queued || time.Now().After(deadline) {
			break
		}
		time.Sleep(100 * time.Millisecond)
	}
	_ = second.Process.Signal(syscall.SIGTERM)
	_ = second.Wait()
	if m.Status != outreach.Sent || m.Tries != 2 || !m.Resent {
		t.Fatalf("after the restart: %s, %d tries, resent %v (want sent, 2, true)\n%s", m.Status, m.Tries, m.Resent, log2.String())
	}
	got = mailbox.Messages()
	if len(got) != 2 {
		t.Fatalf("%d copies in the mailbox, want 2 (the documented behaviour: one extra copy per crash)", len(got))
	}
	want := "<" + m.Key + "@riverside.example.org>"
	for i, g := range got {
		if id := g.Header.Get("Message-Id"); id != want {
			t.Errorf("copy %d has Message-ID %q, want %q (the same on every try)", i+1, id, want)
		}
	}
	events, err := store.CaseTimeline(ctx, db.Case{ID: cases[0]}, time.UTC)
	if err != nil {
		t.Fatal(err)
	}
	found := false
	for _, e := range events {
		if e.Kind == db.EventMessage && e.Message.Resent && e.Message.Status == outreach.Sent {
			found = true
		}
	}
	if !found {
		t.Fatal("the case timeline does not show the resent message")
	}
	if n := strings.Count(log2.String(), "message sent again after a try whose end was not recorded"); n != 1 {
		t.Errorf("the restarted server logged the resend %d times", n)
	}
}
