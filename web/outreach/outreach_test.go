package outreach_test

import (
	"context"
	"encoding/json"
	"encoding/pem"
	"errors"
	"io"
	"net/http"
	"net/http/httptest"
	"os"
	"path/filepath"
	"strings"
	"sync/atomic"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
	"cohortdesk/cohort/outreach"
	"cohortdesk/db"
	"cohortdesk/db/dbtest"
	sender "cohortdesk/web/outreach"
	"cohortdesk/web/outreach/smtptest"
)

func TestMain(m *testing.M) { dbtest.Main(m) }

var coordinator = cohort.Actor{UserID: 0, Name: "Test Coordinator", Role: cohort.Coordinator}

// testNow is the clock of the store and the sender: noon UTC on Monday 1
// June 2026, outside every participant's default quiet hours (the fixtures'
// participants live in UTC) and in the past, so jobs scheduled from it are
// due at once.
var testNow = time.Date(2026, 6, 1, 12, 0, 0, 0, time.UTC)

func newStore(t *testing.T) *db.Store {
	t.Helper()
	return db.New(dbtest.Pool(t), func() time.Time { return testNow })
}

func smtpFor(t testing.TB, srv *smtptest.Server, security, user, password string) *sender.SMTP {
	t.Helper()
	s, err := sender.NewSMTP(sender.SMTPConfig{Host: srv.Host, Port: srv.Port, Security: security, Username: user, Password: password,
		From: "Study team <team@riverside.example.org>", CAFile: srv.CAFile, Timeout: 10 * time.Second})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { s.Close() })
	return s
}

func out(key string) sender.Outgoing {
	return sender.Outgoing{Key: key, MessageID: key + "@riverside.example.org", To: "wren@example.org", Subject: "A message from your study team", Body: "Dear Wren,\nplease call.\n"}
}

// TestSMTPOverEachSecurityMode sends through the real server with no
// encryption, with STARTTLS and authentication, and with implicit TLS: the
// message arrives with its headers and body, and the server saw the
// encryption and the sign-in.
func TestSMTPOverEachSecurityMode(t *testing.T) {
	ctx := context.Background()
	for _, c := range []struct {
		name, tls, security, user string
		wantTLS, wantAuth         string
	}{
		{"plain", smtptest.NoTLS, sender.SecurityNone, "", "tls=no", "auth=no"},
		{"starttls with sign-in", smtptest.STARTTLS, sender.SecuritySTARTTLS, "desk", "tls=yes", "auth=yes"},
		{"implicit tls", smtptest.Implicit, sender.SecurityTLS, "", "tls=yes", "auth=no"},
	} {
		t.Run(c.name, func(t *testing.T) {
			password := ""
			if c.user != "" {
				password = "pw-" + c.user
			}
			srv := smtptest.Start(t, smtptest.Options{TLS: c.tls, User: c.user, Password: password})
			s := smtpFor(t, srv, c.security, c.user, password)
			rec, err := s.Send(ctx, out("k-1"))
			if err != nil {
				t.Fatal(err)
			}
			if !strings.Contains(rec.Detail, "stored as") {
				t.Errorf("server answer %q", rec.Detail)
			}
			// The connection is kept for the next message.
			if _, err := s.Send(ctx, out("k-2")); err != nil {
				t.Fatal(err)
			}
			got := srv.Wait(2, 10*time.Second)
			m := got[0]
			if m.Header.Get("Message-Id") != "<k-1@riverside.example.org>" || m.Header.Get("Subject") != "A message from your study team" ||
				m.Header.Get("To") != "<wren@example.org>" || !strings.Contains(m.Header.Get("From"), "team@riverside.example.org") {
				t.Errorf("headers %v", m.Header)
			}
			if !strings.Contains(m.Body, "please call.") {
				t.Errorf("body %q", m.Body)
			}
			if ua := m.Header.Get("User-Agent") + m.Header.Get("X-Mailer"); ua != "cohortdeskcohortdesk" {
				t.Errorf("client headers %q", ua)
			}
			if !strings.Contains(m.Envelope, c.wantTLS) || !strings.Contains(m.Envelope, c.wantAuth) || !strings.Contains(m.Envelope, "to=<wren@example.org>") {
				t.Errorf("envelope %q, want %s %s", m.Envelope, c.wantTLS, c.wantAuth)
			}
		})
	}
	t.Run("wrong password", func(t *testing.T) {
		srv := smtptest.Start(t, smtptest.Options{TLS: smtptest.STARTTLS, User: "desk", Password: "right"})
		_, err := smtpFor(t, srv, sender.SecuritySTARTTLS, "desk", "wrong").Send(ctx, out("k"))
		var r *sender.Refusal
		if !errors.As(err, &r) || r.Permanent {
			t.Fatalf("a refused sign-in: %v (a server setting, tried again, never the participant's fault)", err)
		}
	})
}

// TestSMTPRefusalDeferralAndOutage: 550 is permanent, 451 and a server that
// is down are temporary.
func TestSMTPRefusalDeferralAndOutage(t *testing.T) {
	ctx := context.Background()
	srv := smtptest.Start(t, smtptest.Options{})
	s := smtpFor(t, srv, sender.SecurityNone, "", "")
	var r *sender.Refusal
	srv.SetMode(smtptest.Refuse)
	if _, err := s.Send(ctx, out("a")); !errors.As(err, &r) || !r.Permanent || !strings.Contains(r.Detail, "550") {
		t.Fatalf("refused: %v", err)
	}
	srv.SetMode(smtptest.Defer)
	if _, err := s.Send(ctx, out("b")); !errors.As(err, &r) || r.Permanent || !strings.Contains(r.Detail, "451") {
		t.Fatalf("deferred: %v", err)
	}
	srv.SetMode(smtptest.Accept)
	if _, err := s.Send(ctx, out("c")); err != nil {
		t.Fatalf("after the deferral: %v", err)
	}
	srv.Stop()
	if _, err := s.Send(ctx, out("d")); !errors.As(err, &r) || r.Permanent {
		t.Fatalf("server down: %v", err)
	}
	if got := srv.Messages(); len(got) != 1 {
		t.Fatalf("%d messages stored, want 1", len(got))
	}
}

// run works the queue until it is empty.
func run(t *testing.T, w *db.Worker) {
	t.Helper()
	for range 100 {
		did, err := w.RunOne(context.Background(), 0)
		if err != nil {
			t.Fatal(err)
		}
		if !did {
			return
		}
	}
	t.Fatal("the queue did not empty")
}

func queue(t *testing.T, store *db.Store, caseID int64, ch followup.Channel) db.QueuedMessage {
	t.Helper()
	q, err := store.QueueMessage(context.Background(), coordinator, caseID, db.MessageInput{Version: 1, Purpose: outreach.PurposeFirstContact, Channel: ch})
	if err != nil {
		t.Fatal(err)
	}
	return q
}

func message(t *testing.T, store *db.Store, id int64) db.Message {
	t.Helper()
	m, err := store.Message(context.Background(), id)
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// TestOutboxThroughTheRealServer queues messages and runs the sending jobs
// against the real server: accepted (sent, with its Message-ID on the wire),
// refused for good (undeliverable, recorded on the case), deferred until
// the desk gives up (failed after its tries), deferred then accepted, and a
// server down then back.
func TestOutboxThroughTheRealServer(t *testing.T) {
	store := newStore(t)
	ctx := context.Background()
	cases := dbtest.OutreachCases(t, store, 5)
	srv := smtptest.Start(t, smtptest.Options{})
	snd := &sender.Sender{Store: store, Email: smtpFor(t, srv, sender.SecurityNone, "", ""), Domain: "riverside.example.org",
		Now: func() time.Time { return testNow }, Tries: 3, Backoff: func(int) time.Duration { return 0 }}
	w := &db.Worker{Store: store, Handlers: snd.Handlers(), Poll: 10 * time.Millisecond}

	// Accepted.
	q := queue(t, store, cases[0], followup.ChannelEmail)
	run(t, w)
	m := message(t, store, q.ID)
	if m.Status != outreach.Sent || m.Tries != 1 || !strings.Contains(m.Detail, "stored as") {
		t.Fatalf("accepted: %+v", m)
	}
	got := srv.Wait(1, 10*time.Second)
	if id := got[0].Header.Get("Message-Id"); id != "<"+m.Key+"@riverside.example.org>" {
		t.Fatalf("Message-ID %q, key %s", id, m.Key)
	}
	if !strings.Contains(got[0].Body, "Dear Wren") || !strings.Contains(got[0].Body, "555-0100") || got[0].Header.Get("To") != "<rv-0001@example.org>" {
		t.Fatalf("the stored message:\n%s", got[0].Raw)
	}

	// Refused for good: undeliverable, and the case says so.
	srv.SetMode(smtptest.Refuse)
	q = queue(t, store, cases[1], followup.ChannelEmail)
	run(t, w)
	if m := message(t, store, q.ID); m.Status != outreach.Undeliverable || !strings.Contains(m.Detail, "550") {
		t.Fatalf("refused: %+v", m)
	}
	var outcome string
	store.Pool().QueryRow(ctx, `SELECT outcome FROM contact_attempts WHERE case_id = $1`, cases[1]).Scan(&outcome)
	if outcome != string(followup.OutcomeUndeliverable) {
		t.Fatalf("the refused message's attempt is %q", outcome)
	}

	// Deferred every time: failed after three tries, with the reason.
	srv.SetMode(smtptest.Defer)
	q = queue(t, store, cases[2], followup.ChannelEmail)
	run(t, w)
	if m := message(t, store, q.ID); m.Status != outreach.Failed || m.Tries != 3 || !strings.Contains(m.Detail, "gave up after 3 tries") || !strings.Contains(m.Detail, "451") {
		t.Fatalf("deferred: %+v", m)
	}

	// Deferred once, then accepted.
	q = queue(t, store, cases[3], followup.ChannelEmail)
	if did, err := w.RunOne(ctx, 0); !did || err != nil {
		t.Fatalf("first try: %v %v", did, err)
	}
	if m := message(t, store, q.ID); m.Status != outreach.Queued || m.Tries != 1 {
		t.Fatalf("after a deferral: %+v", m)
	}
	srv.SetMode(smtptest.Accept)
	run(t, w)
	if m := message(t, store, q.ID); m.Status != outreach.Sent || m.Tries != 2 || m.Resent {
		t.Fatalf("accepted on the second try: %+v", m)
	}

	// The server down, then back.
	srv2 := smtptest.Start(t, smtptest.Options{})
	snd.Email = smtpFor(t, srv2, sender.SecurityNone, "", "")
	srv2.Stop()
	q = queue(t, store, cases[4], followup.ChannelEmail)
	if did, err := w.RunOne(ctx, 0); !did || err != nil {
		t.Fatalf("server down: %v %v", did, err)
	}
	if m := message(t, store, q.ID); m.Status != outreach.Queued || m.Tries != 1 || m.Detail == "" {
		t.Fatalf("server down: %+v", m)
	}
	snd.Email = smtpFor(t, srv, sender.SecurityNone, "", "")
	run(t, w)
	if m := message(t, store, q.ID); m.Status != outreach.Sent || m.Tries != 2 {
		t.Fatalf("server back: %+v", m)
	}
	if n := len(srv.Messages()); n != 3 {
		t.Fatalf("%d messages stored, want 3 (accepted, second try, after the outage)", n)
	}
}

// TestSenderChecksPreferencesAgain: an opt-out recorded after the message
// was queued stops it; quiet hours that began meanwhile hold it.
func TestSenderChecksPreferencesAgain(t *testing.T) {
	store := newStore(t)
	ctx := context.Background()
	cases := dbtest.OutreachCases(t, store, 2)
	srv := smtptest.Start(t, smtptest.Options{})
	now := testNow
	snd := &sender.Sender{Store: store, Email: smtpFor(t, srv, sender.SecurityNone, "", ""), Now: func() time.Time { return now }}
	w := &db.Worker{Store: store, Handlers: snd.Handlers()}
	q := queue(t, store, cases[0], followup.ChannelEmail)
	var pid int64
	store.Pool().QueryRow(ctx, `SELECT participant_id FROM cases WHERE id = $1`, cases[0]).Scan(&pid)
	p := outreach.Defaults()
	p.OptedOut[followup.ChannelEmail] = true
	if _, err := store.SaveContactPreferences(ctx, coordinator, pid, 0, p); err != nil {
		t.Fatal(err)
	}
	run(t, w)
	if m := message(t, store, q.ID); m.Status != outreach.Failed || !strings.Contains(m.Detail, "opted out") {
		t.Fatalf("after an opt-out: %+v", m)
	}
	// Quiet hours from now on: the job waits for their end without a try.
	q = queue(t, store, cases[1], followup.ChannelEmail)
	store.Pool().QueryRow(ctx, `SELECT participant_id FROM cases WHERE id = $1`, cases[1]).Scan(&pid)
	quiet := outreach.Defaults()
	local := now.UTC()
	quiet.QuietFrom = outreach.Clock(local.Hour()*60 + local.Minute())
	quiet.QuietUntil = (quiet.QuietFrom + 120) % (24 * 60)
	if _, err := store.SaveContactPreferences(ctx, coordinator, pid, 0, quiet); err != nil {
		t.Fatal(err)
	}
	if did, err := w.RunOne(ctx, 0); !did || err != nil {
		t.Fatal(did, err)
	}
	if m := message(t, store, q.ID); m.Status != outreach.Queued || m.Tries != 0 {
		t.Fatalf("in quiet hours: %+v", m)
	}
	var runAfter time.Time
	var errText string
	store.Pool().QueryRow(ctx, `SELECT run_after, error FROM jobs WHERE (payload->>'message_id')::bigint = $1`, q.ID).Scan(&runAfter, &errText)
	if d := runAfter.Sub(now); d < 119*time.Minute || d > 121*time.Minute || !strings.Contains(errText, "quiet hours") {
		t.Fatalf("held until %v (%v from now): %q", runAfter, d, errText)
	}
	if len(srv.Messages()) != 0 {
		t.Fatal("a message went out")
	}
}

// TestTextGatewayOverTLS sends text messages through a local HTTPS server
// playing a gateway: the body follows the template, the token and the
// idempotency key go along; a "delivered" answer is recorded as delivered, a
// 400 as undeliverable, a 503 as temporary.
func TestTextGatewayOverTLS(t *testing.T) {
	store := newStore(t)
	ctx := context.Background()
	cases := dbtest.OutreachCases(t, store, 3)
	var answer atomic.Value
	answer.Store("ok")
	type got struct {
		auth, key string
		body      map[string]string
	}
	seen := make(chan got, 10)
	gw := httptest.NewTLSServer(http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		raw, _ := io.ReadAll(r.Body)
		var b map[string]string
		if err := json.Unmarshal(raw, &b); err != nil {
			http.Error(w, "not json: "+string(raw), http.StatusBadRequest)
			return
		}
		seen <- got{r.Header.Get("Authorization"), r.Header.Get("Idempotency-Key"), b}
		switch answer.Load() {
		case "bad number":
			w.WriteHeader(http.StatusBadRequest)
			io.WriteString(w, `{"error": "number not reachable"}`)
		case "busy":
			w.WriteHeader(http.StatusServiceUnavailable)
		default:
			io.WriteString(w, `{"id": "gw-77", "status": "delivered"}`)
		}
	}))
	defer gw.Close()
	g, err := sender.NewGateway(sender.GatewayConfig{URL: gw.URL + "/send", Token: "secret-token",
		Body: `{"number": {{to}}, "message": {{body}}, "ref": {{key}}}`}, gw.Client())
	if err != nil {
		t.Fatal(err)
	}
	snd := &sender.Sender{Store: store, Text: g, Now: func() time.Time { return testNow }, Backoff: func(int) time.Duration { return 0 }, Tries: 2}
	w := &db.Worker{Store: store, Handlers: snd.Handlers()}
	var pids []int64
	for _, c := range cases {
		var pid int64
		store.Pool().QueryRow(ctx, `SELECT participant_id FROM cases WHERE id = $1`, c).Scan(&pid)
		p := outreach.Defaults()
		p.Consent[followup.ChannelText] = true
		if _, err := store.SaveContactPreferences(ctx, coordinator, pid, 0, p); err != nil {
			t.Fatal(err)
		}
		pids = append(pids, pid)
	}
	q := queue(t, store, cases[0], followup.ChannelText)
	run(t, w)
	m := message(t, store, q.ID)
	if m.Status != outreach.Delivered || m.ProviderRef != "gw-77" {
		t.Fatalf("delivered: %+v", m)
	}
	s := <-seen
	if s.auth != "Bearer secret-token" || s.key != m.Key || s.body["ref"] != m.Key || !strings.HasPrefix(s.body["number"], "+1555010") ||
		!strings.Contains(s.body["message"], "555-0100") {
		t.Fatalf("the gateway saw %+v", s)
	}
	answer.Store("bad number")
	q = queue(t, store, cases[1], followup.ChannelText)
	run(t, w)
	if m := message(t, store, q.ID); m.Status != outreach.Undeliverable || !strings.Contains(m.Detail, "not reachable") {
		t.Fatalf("a 400: %+v", m)
	}
	<-seen
	answer.Store("busy")
	q = queue(t, store, cases[2], followup.ChannelText)
	run(t, w)
	if m := message(t, store, q.ID); m.Status != outreach.Failed || m.Tries != 2 || !strings.Contains(m.Detail, "503") {
		t.Fatalf("a busy gateway: %+v", m)
	}
	// A later delivery receipt cannot revive a failed message.
	if ok, err := store.MessageReceipt(ctx, m.Key, outreach.Delivered, "late"); err != nil || !ok {
		t.Fatal(ok, err)
	}
	if _, err := sender.NewGateway(sender.GatewayConfig{URL: "http://plain.example.org/send"}, nil); err == nil {
		t.Fatal("a gateway without TLS was accepted")
	}
	if _, err := sender.NewGateway(sender.GatewayConfig{URL: "https://gw.example.org/send", Body: `{"to": {{to}}, "text": {{body}}`}, nil); err == nil {
		t.Fatal("a body template without the key, making no valid JSON, was accepted")
	}
	_ = pids
}

// A morning summary the mail server puts off (451) is tried again a
// quarter of an hour later, that morning, and sent then; the job after it
// is the next working morning's.
func TestMorningSummaryPutOffIsTriedAgain(t *testing.T) {
	store := newStore(t)
	ctx := context.Background()
	dbtest.OutreachCases(t, store, 1)
	if _, err := store.Pool().Exec(ctx, `INSERT INTO users (email, display_name, role, password_hash, morning_summary)
		VALUES ('early.coordinator@example.org', 'Desk staff', 'coordinator', 'x', true)`); err != nil {
		t.Fatal(err)
	}
	srv := smtptest.Start(t, smtptest.Options{})
	srv.SetMode(smtptest.Defer)
	now := testNow // Monday 1 June 2026, 12:00 in the study's zone (UTC)
	snd := &sender.Sender{Store: store, Email: smtpFor(t, srv, sender.SecurityNone, "", ""), Now: func() time.Time { return now },
		Domain: "riverside.example.org", SummaryAt: outreach.Clock(10 * 60)}
	if err := snd.Start(ctx, store.StudySettings); err != nil {
		t.Fatal(err)
	}
	w := &db.Worker{Store: store, Handlers: snd.Handlers()}
	runQueued := func() time.Time {
		t.Helper()
		var next time.Time
		store.Pool().QueryRow(ctx, `SELECT run_after FROM jobs WHERE kind = $1 AND state = 'queued'`, db.JobMorningSummary).Scan(&next)
		store.Pool().Exec(ctx, `UPDATE jobs SET run_after = clock_timestamp() WHERE kind = $1 AND state = 'queued'`, db.JobMorningSummary)
		if did, err := w.RunOne(ctx, 0); !did || err != nil {
			t.Fatal(did, err)
		}
		return next
	}
	runQueued() // the run of 10:00, late: the server puts the summary off
	if n := len(srv.Messages()); n != 0 {
		t.Fatalf("a deferring server stored %d summaries", n)
	}
	srv.SetMode(smtptest.Accept)
	now = now.Add(15 * time.Minute)
	if next := runQueued(); !next.Equal(testNow.Add(15 * time.Minute)) {
		t.Fatalf("the put-off summary's retry was queued for %v, want a quarter of an hour later (%v)", next, testNow.Add(15*time.Minute))
	}
	if got := srv.Wait(1, 10*time.Second); len(got) != 1 || got[0].Header.Get("To") != "<early.coordinator@example.org>" {
		t.Fatalf("%d summaries after the retry: %+v", len(got), got)
	}
	var next time.Time
	store.Pool().QueryRow(ctx, `SELECT run_after FROM jobs WHERE kind = $1 AND state = 'queued'`, db.JobMorningSummary).Scan(&next)
	if want := time.Date(2026, 6, 2, 10, 0, 0, 0, time.UTC); !next.Equal(want) {
		t.Fatalf("after the summary went, the next run is %v, want %v", next, want)
	}
}

// TestMorningSummaryCountsOnly runs the morning job against the real mail
// server: each person who asked gets one e-mail with the counts of their
// overdue and due-today cases and the new flags, a link to triage and no
// study ID or name of a participant; a second run the same day sends
// nothing again; the job queues its next run on the next working day.
func TestMorningSummaryCountsOnly(t *testing.T) {
	store := newStore(t)
	ctx := context.Background()
	cases := dbtest.OutreachCases(t, store, 4)
	var mine, theirs int64
	for _, u := range []struct {
		email string
		id    *int64
		on    bool
	}{{"first.coordinator@example.org", &mine, true}, {"other.coordinator@example.org", &theirs, false}} {
		err := store.Pool().QueryRow(ctx, `INSERT INTO users (email, display_name, role, password_hash, morning_summary)
			VALUES ($1, $2, 'coordinator', 'x', $3) RETURNING id`, u.email, "Desk staff "+u.email[:5], u.on).Scan(u.id)
		if err != nil {
			t.Fatal(err)
		}
	}
	// Two of mine overdue and one due today; one of theirs overdue; one new.
	store.Pool().Exec(ctx, `UPDATE cases SET owner_id = $1, due_at = $2 WHERE id = ANY($3)`, mine, testNow.Add(-48*time.Hour), cases[:2])
	store.Pool().Exec(ctx, `UPDATE cases SET owner_id = $1, due_at = $2 WHERE id = $3`, mine, testNow.Add(6*time.Hour), cases[2])
	store.Pool().Exec(ctx, `UPDATE cases SET owner_id = $1, due_at = $2 WHERE id = $3`, theirs, testNow.Add(-time.Hour), cases[3])
	store.Pool().Exec(ctx, `INSERT INTO participants (study_id, site_id, time_zone, enrolled_on) VALUES ('RV-9999', 1, 'UTC', '2026-01-05')`)
	store.Pool().Exec(ctx, `INSERT INTO screen_results (participant_id, protocol_id, week, verdict, reason, result, input_digest, wear_hours)
		SELECT id, 1, 3, 'positive', 'x', '{}', 'd', 90 FROM participants WHERE study_id = 'RV-9999'`)
	if _, _, err := store.SyncCases(ctx, cohort.System, 1, nil); err != nil {
		t.Fatal(err)
	}
	srv := smtptest.Start(t, smtptest.Options{})
	snd := &sender.Sender{Store: store, Email: smtpFor(t, srv, sender.SecurityNone, "", ""), Now: func() time.Time { return testNow },
		TriageURL: "https://desk.example.org/triage", Domain: "riverside.example.org"}
	if err := snd.Start(ctx, store.StudySettings); err != nil {
		t.Fatal(err)
	}
	// The first run is queued for 07:00 the next working day; run it now.
	store.Pool().Exec(ctx, `UPDATE jobs SET run_after = clock_timestamp() WHERE kind = $1`, db.JobMorningSummary)
	w := &db.Worker{Store: store, Handlers: snd.Handlers()}
	if did, err := w.RunOne(ctx, 0); !did || err != nil {
		t.Fatal(did, err)
	}
	got := srv.Wait(1, 10*time.Second)
	if len(got) != 1 || got[0].Header.Get("To") != "<first.coordinator@example.org>" {
		t.Fatalf("%d summaries: %+v", len(got), got)
	}
	body := got[0].Body
	for _, want := range []string{"2 cases of yours overdue", "1 case of yours due today", "1 new flag that nobody has taken on", "https://desk.example.org/triage"} {
		if !strings.Contains(body, want) {
			t.Errorf("the summary lacks %q:\n%s", want, body)
		}
	}
	if strings.Contains(body, "RV-") || strings.Contains(body, "Wren") || strings.Contains(body, "Alderby") {
		t.Fatalf("the summary names a participant:\n%s", body)
	}
	// The next run is queued for 07:00 on Tuesday 2 June (the next working day).
	var next time.Time
	store.Pool().QueryRow(ctx, `SELECT run_after FROM jobs WHERE kind = $1 AND state = 'queued'`, db.JobMorningSummary).Scan(&next)
	if !next.Equal(time.Date(2026, 6, 2, 7, 0, 0, 0, time.UTC)) {
		t.Fatalf("next run %v", next)
	}
	store.Pool().Exec(ctx, `UPDATE jobs SET run_after = clock_timestamp() WHERE kind = $1 AND state = 'queued'`, db.JobMorningSummary)
	if did, err := w.RunOne(ctx, 0); !did || err != nil {
		t.Fatal(did, err)
	}
	if n := len(srv.Messages()); n != 1 {
		t.Fatalf("a second run the same day sent %d summaries in all", n)
	}
}

// A gateway whose answer names its fields its own way, behind a certificate
// from its own authority: the settings name the state and reference fields,
// the states that mean delivered, and the authority's PEM file, and the
// answer is read by them. Without the authority the certificate is refused
// (a temporary failure, never a message taken as sent).
func TestTextGatewayAnswerFieldsAndAuthority(t *testing.T) {
	gw := httptest.NewTLSServer(http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		io.WriteString(w, `{"messageRef": 4417, "state": "DELIVRD", "status": "queued"}`)
	}))
	defer gw.Close()
	ca := filepath.Join(t.TempDir(), "gateway-ca.pem")
	if err := os.WriteFile(ca, pem.EncodeToMemory(&pem.Block{Type: "CERTIFICATE", Bytes: gw.Certificate().Raw}), 0o600); err != nil {
		t.Fatal(err)
	}
	out := sender.Outgoing{Key: "9f1c", To: "+15550101", Body: "Please contact the study team."}
	g, err := sender.NewGateway(sender.GatewayConfig{URL: gw.URL + "/send", StatusField: "state", RefField: "messageRef",
		Delivered: []string{"DELIVRD", "delivered"}, CAFile: ca}, nil)
	if err != nil {
		t.Fatal(err)
	}
	r, err := g.Send(context.Background(), out)
	if err != nil {
		t.Fatal(err)
	}
	if !r.Delivered || r.Ref != "4417" {
		t.Errorf("receipt %+v: want delivered (state DELIVRD) with reference 4417", r)
	}
	// The default fields read "status": queued, not delivered.
	d, err := sender.NewGateway(sender.GatewayConfig{URL: gw.URL + "/send", CAFile: ca}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if r, err := d.Send(context.Background(), out); err != nil || r.Delivered || r.Ref != "" {
		t.Errorf("default fields: receipt %+v, err %v; want taken, not delivered, no reference", r, err)
	}
	// The system's authorities do not know the gateway's.
	plain, err := sender.NewGateway(sender.GatewayConfig{URL: gw.URL + "/send"}, nil)
	if err != nil {
		t.Fatal(err)
	}
	var refusal *sender.Refusal
	if _, err := plain.Send(context.Background(), out); !errors.As(err, &refusal) || refusal.Permanent {
		t.Errorf("an unknown authority: %v; want a temporary refusal", err)
	}
	if _, err := sender.NewGateway(sender.GatewayConfig{URL: gw.URL + "/send", CAFile: filepath.Join(t.TempDir(), "none.pem")}, nil); err == nil {
		t.Error("a missing CA file was accepted")
	}
}
