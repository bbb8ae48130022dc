package outreach_test

import (
	"context"
	"sync"
	"testing"
	"time"

	"cohortdesk/cohort/followup"
	"cohortdesk/cohort/outreach"
	"cohortdesk/db"
	"cohortdesk/db/dbtest"
	sender "cohortdesk/web/outreach"
	"cohortdesk/web/outreach/smtptest"

	gomail "github.com/wneessen/go-mail"
)

// BenchmarkOutboxVersusDirectSMTP measures sending 1,000 first-contact
// e-mails to the real test mail server (aiosmtpd on the loopback) through
// the outbox: queued in bulk (each with its contact attempt, audit events
// and sending job), then sent by background workers, one job per message,
// each try recorded before and after. The baseline, in the same run: the
// same 1,000 messages, built the same way, sent by the raw SMTP client over
// one connection with nothing recorded. Reported: messages per second of
// the outbox with 1 and with 2 workers, of the baseline, and the time to
// queue them. Run with -benchtime 1x (each iteration sets up 1,000 cases).
func BenchmarkOutboxVersusDirectSMTP(b *testing.B) {
	const n = 1000
	ctx := context.Background()
	srv := smtptest.Start(b, smtptest.Options{})
	var queueS, outbox1S, outbox2S, directS float64
	for b.Loop() {
		for _, workers := range []int{1, 2} {
			store := db.New(dbtest.Pool(b), func() time.Time { return testNow })
			cases := dbtest.OutreachCases(b, store, n)
			refs := make([]db.CaseRef, len(cases))
			for i, c := range cases {
				refs[i] = db.CaseRef{ID: c, Version: 1}
			}
			t0 := time.Now()
			for lo := 0; lo < n; lo += 500 {
				res, err := store.QueueMessages(ctx, coordinator, refs[lo:lo+500], outreach.PurposeFirstContact, followup.ChannelEmail)
				if err != nil || len(res.Queued) != 500 {
					b.Fatalf("queue: %d queued, %v", len(res.Queued), err)
				}
			}
			if workers == 1 {
				queueS += time.Since(t0).Seconds()
			}
			snd := &sender.Sender{Store: store, Email: smtpFor(b, srv, sender.SecurityNone, "", ""), Domain: "riverside.example.org",
				Now: func() time.Time { return testNow }}
			t0 = time.Now()
			var wg sync.WaitGroup
			for range workers {
				// Each worker its own connection, as each process's sender would
				// be shared by its workers; here one sender per worker keeps
				// them from waiting for each other's connection.
				s := *snd
				s.Email = smtpFor(b, srv, sender.SecurityNone, "", "")
				w := &db.Worker{Store: store, Handlers: s.Handlers()}
				wg.Go(func() {
					for {
						did, err := w.RunOne(ctx, 0)
						if err != nil {
							b.Error(err)
							return
						}
						if !did {
							return
						}
					}
				})
			}
			wg.Wait()
			took := time.Since(t0).Seconds()
			var sent int
			store.Pool().QueryRow(ctx, `SELECT count(*) FROM messages WHERE status = 'sent'`).Scan(&sent)
			if sent != n {
				b.Fatalf("%d of %d sent", sent, n)
			}
			if workers == 1 {
				outbox1S += took
			} else {
				outbox2S += took
			}
			if workers != 1 {
				continue
			}
			// The baseline: the same messages through the raw client.
			rows, err := store.Pool().Query(ctx, `SELECT idempotency_key::text, recipient, subject, body FROM messages ORDER BY id`)
			if err != nil {
				b.Fatal(err)
			}
			builder := smtpFor(b, srv, sender.SecurityNone, "", "")
			var msgs []*gomail.Msg
			for rows.Next() {
				var o sender.Outgoing
				if err := rows.Scan(&o.Key, &o.To, &o.Subject, &o.Body); err != nil {
					b.Fatal(err)
				}
				o.MessageID = o.Key + "@riverside.example.org"
				m, err := builder.Message(o)
				if err != nil {
					b.Fatal(err)
				}
				msgs = append(msgs, m)
			}
			c, err := gomail.NewClient(srv.Host, gomail.WithPort(srv.Port), gomail.WithTLSPolicy(gomail.NoTLS), gomail.WithHELO("riverside.example.org"))
			if err != nil {
				b.Fatal(err)
			}
			t0 = time.Now()
			if err := c.DialAndSendWithContext(ctx, msgs...); err != nil {
				b.Fatal(err)
			}
			directS += time.Since(t0).Seconds()
		}
	}
	iters := float64(b.N)
	b.ReportMetric(n*iters/outbox1S, "outbox-msgs/s-1-worker")
	b.ReportMetric(n*iters/outbox2S, "outbox-msgs/s-2-workers")
	b.ReportMetric(n*iters/directS, "direct-msgs/s")
	b.ReportMetric(queueS/iters, "s-to-queue-1000")
	b.ReportMetric(outbox1S/directS, "outbox/direct-time")
}
