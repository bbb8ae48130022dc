package db_test

import (
	"context"
	"errors"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
	"cohortdesk/cohort/outreach"
	"cohortdesk/db"
)

// outreachFixture is a case fixture with n open cases P1..Pn, contact
// details on file, the study's settings and the default templates.
func outreachFixture(t *testing.T, n int) *caseFixture {
	t.Helper()
	f := newCaseFixture(t, n)
	saveSettings(t, f.s, func(st *db.StudySettings) {
		st.Name, st.ContactRoute = "Riverside Rhythm Study", "call 555-0100 on working days"
	})
	for sid := range f.pids {
		f.positive(f.proto, sid, 2)
	}
	f.sync()
	mustExec(t, f.s, `INSERT INTO participant_identity (participant_id, given_name, family_name, email, phone, street, city, zip)
		SELECT id, 'Wren' || study_id, 'Alderby', lower(study_id) || '@example.org', '555-01' || lpad(id::text, 2, '0'), '1 Mill Lane', 'Riverside', '55501'
		FROM participants`)
	if err := f.s.EnsureDefaultTemplates(context.Background()); err != nil {
		t.Fatal(err)
	}
	return f
}

func TestQueueMessageWritesAttemptMessageAndJobTogether(t *testing.T) {
	f := outreachFixture(t, 2)
	ctx := context.Background()
	id := f.caseID("P1")
	q, err := f.s.QueueMessage(ctx, f.coord, id, db.MessageInput{Version: 1, Purpose: outreach.PurposeFirstContact, Channel: followup.ChannelEmail})
	if err != nil {
		t.Fatal(err)
	}
	if q.Held || q.Template != "first contact by e-mail, v1" {
		t.Fatalf("queued %+v", q)
	}
	c := f.get(id)
	if c.State != followup.Contacting || c.Version != 2 {
		t.Fatalf("case after the message: %s v%d", c.State, c.Version)
	}
	var ch, outcome, note string
	if err := f.s.Pool().QueryRow(ctx, `SELECT channel, outcome, note FROM contact_attempts WHERE case_id = $1`, id).Scan(&ch, &outcome, &note); err != nil {
		t.Fatal(err)
	}
	if ch != "email" || outcome != "message_left" || !strings.Contains(note, "first contact (template v1)") {
		t.Fatalf("attempt %s %s %q", ch, outcome, note)
	}
	_, content, err := f.s.MessageContent(ctx, f.coord, q.ID)
	if err != nil {
		t.Fatal(err)
	}
	// Monday 1 June 2026 plus 5 working days is Monday 8 June (computed by hand).
	for _, want := range []string{"Dear WrenP1,", "Riverside Rhythm Study", "call 555-0100 on working days", "Monday 8 June 2026", "study number, P1"} {
		if !strings.Contains(content.Body, want) {
			t.Errorf("body lacks %q:\n%s", want, content.Body)
		}
	}
	if content.Recipient != "p1@example.org" || content.Subject != "A message from your study team" {
		t.Fatalf("content %+v", content)
	}
	if n := f.count(`SELECT count(*) FROM jobs WHERE kind = 'message.send' AND (payload->>'message_id')::bigint = $1`, q.ID); n != 1 {
		t.Fatalf("%d sending jobs", n)
	}
	// The screening page's job list leaves the outbox's jobs out.
	if jobs, err := f.s.Jobs(ctx, 10); err != nil || len(jobs) != 0 {
		t.Fatalf("the job list shows %d jobs (%v), want none of the outbox's", len(jobs), err)
	}
	for _, action := range []string{"case.attempt", "message.queue"} {
		if n := f.count(`SELECT count(*) FROM audit_events WHERE action = $1`, action); n != 1 {
			t.Errorf("%d %s audit events", n, action)
		}
	}
	// The audit of the message keeps no body or address.
	if n := f.count(`SELECT count(*) FROM audit_events WHERE action = 'message.queue' AND new_value::text LIKE '%example.org%'`); n != 0 {
		t.Error("the audit trail copies the recipient")
	}
	// A second send from the same page (a second coordinator at the same
	// moment) is a stale copy: refused, nothing written.
	_, err = f.s.QueueMessage(ctx, f.coord, id, db.MessageInput{Version: 1, Purpose: outreach.PurposeFirstContact, Channel: followup.ChannelEmail})
	var ce *cohort.ConflictError
	if !errors.As(err, &ce) || !strings.Contains(ce.Message, "logged a contact attempt") {
		t.Fatalf("second send: %v", err)
	}
	if n := f.count(`SELECT count(*) FROM messages`); n != 1 {
		t.Fatalf("%d messages after the refused second send", n)
	}
	// The timeline lists the message with its channel and template version.
	events, err := f.s.CaseTimeline(ctx, f.get(id), time.UTC)
	if err != nil {
		t.Fatal(err)
	}
	var found bool
	for _, e := range events {
		if e.Kind == db.EventMessage && e.Message.ID == q.ID && e.Message.TemplateVersion == 1 && e.Message.Status == outreach.Queued {
			found = true
		}
	}
	if !found {
		t.Fatal("the message is not on the case timeline")
	}
}

func TestQueueMessageRefusalsSayWhy(t *testing.T) {
	f := outreachFixture(t, 4)
	ctx := context.Background()
	mustExec(t, f.s, `UPDATE participant_identity SET email = '' WHERE participant_id = $1`, f.pids["P2"])
	if _, err := f.s.SaveContactPreferences(ctx, f.coord, f.pids["P3"], 0, func() outreach.Preferences {
		p := outreach.Defaults()
		p.OptedOut[followup.ChannelEmail] = true
		return p
	}()); err != nil {
		t.Fatal(err)
	}
	mustExec(t, f.s, `UPDATE cases SET tracking_number = '' WHERE participant_id = $1`, f.pids["P4"])
	for _, c := range []struct {
		sid     string
		purpose outreach.Purpose
		ch      followup.Channel
		field   string
		want    string
	}{
		{"P1", outreach.PurposeFirstContact, followup.ChannelText, "channel", "has not agreed to be contacted by text message"},
		{"P2", outreach.PurposeFirstContact, followup.ChannelEmail, "channel", "no e-mail address is on file"},
		{"P3", outreach.PurposeReminder, followup.ChannelEmail, "channel", "opted out of e-mails"},
		{"P4", outreach.PurposeRecorderOut, followup.ChannelEmail, "message", "no tracking number yet"},
		{"P1", outreach.PurposeFirstContact, followup.ChannelLetter, "channel", "letters are printed"},
	} {
		_, err := f.s.QueueMessage(ctx, f.coord, f.caseID(c.sid), db.MessageInput{Version: 1, Purpose: c.purpose, Channel: c.ch})
		var ve *cohort.ValidationError
		if !errors.As(err, &ve) || !strings.Contains(ve.Fields[c.field], c.want) {
			t.Errorf("%s %s by %s: %v, want %s: %q", c.sid, c.purpose, c.ch, err, c.field, c.want)
		}
	}
	if n := f.count(`SELECT count(*) FROM messages`) + f.count(`SELECT count(*) FROM contact_attempts`); n != 0 {
		t.Fatalf("refused messages wrote %d rows", n)
	}
}

func TestQuietHoursHoldTheMessage(t *testing.T) {
	f := outreachFixture(t, 1)
	ctx := context.Background()
	// 12:00 UTC on 1 June 2026 is 21:00 in Tokyo (UTC+9, no daylight saving;
	// verified): inside the default quiet hours, which end at 08:00 on 2 June
	// in Tokyo, 23:00 UTC on 1 June.
	mustExec(t, f.s, `UPDATE participants SET time_zone = 'Asia/Tokyo'`)
	q, err := f.s.QueueMessage(ctx, f.coord, f.caseID("P1"), db.MessageInput{Version: 1, Purpose: outreach.PurposeFirstContact, Channel: followup.ChannelEmail})
	if err != nil {
		t.Fatal(err)
	}
	want := time.Date(2026, 6, 1, 23, 0, 0, 0, time.UTC)
	if !q.Held || !q.SendAfter.Equal(want) {
		t.Fatalf("held %v until %v, want %v", q.Held, q.SendAfter, want)
	}
	var runAfter time.Time
	if err := f.s.Pool().QueryRow(ctx, `SELECT run_after FROM jobs WHERE kind = 'message.send'`).Scan(&runAfter); err != nil || !runAfter.Equal(want) {
		t.Fatalf("job runs after %v (%v)", runAfter, err)
	}
}

func TestMessageNotDeliveredRecordsItOnTheCase(t *testing.T) {
	f := outreachFixture(t, 1)
	ctx := context.Background()
	id := f.caseID("P1")
	q, err := f.s.QueueMessage(ctx, f.coord, id, db.MessageInput{Version: 1, Purpose: outreach.PurposeFirstContact, Channel: followup.ChannelEmail})
	if err != nil {
		t.Fatal(err)
	}
	tries, resend, ok, err := f.s.BeginTry(ctx, q.ID)
	if err != nil || !ok || tries != 1 || resend {
		t.Fatalf("first try: %d %v %v %v", tries, resend, ok, err)
	}
	// A second try without the first one's end recorded is a resend.
	tries, resend, ok, err = f.s.BeginTry(ctx, q.ID)
	if err != nil || !ok || tries != 2 || !resend {
		t.Fatalf("second try: %d %v %v %v", tries, resend, ok, err)
	}
	if err := f.s.MessageNotDelivered(ctx, q.ID, outreach.Undeliverable, "550 5.1.1 mailbox unavailable"); err != nil {
		t.Fatal(err)
	}
	if _, _, ok, _ := f.s.BeginTry(ctx, q.ID); ok {
		t.Fatal("a try began on an undeliverable message")
	}
	m, err := f.s.Message(ctx, q.ID)
	if err != nil || m.Status != outreach.Undeliverable || !m.Resent || !strings.Contains(m.Detail, "550") {
		t.Fatalf("message %+v %v", m, err)
	}
	var outcome string
	f.s.Pool().QueryRow(ctx, `SELECT outcome FROM contact_attempts WHERE case_id = $1`, id).Scan(&outcome)
	if outcome != string(followup.OutcomeUndeliverable) {
		t.Fatalf("attempt outcome %q", outcome)
	}
	c := f.get(id)
	if c.Version != 3 {
		t.Fatalf("case version %d, want 3 (the system's edit recorded)", c.Version)
	}
	if n := f.count(`SELECT count(*) FROM audit_events e JOIN audit_texts t ON e.new_value->'reason_ref'->>'in' = 'audit_texts/' || t.id || '/body'
		WHERE e.action = 'case.message_result' AND t.body LIKE '%550 5.1.1%'`); n != 1 {
		t.Fatalf("%d case audit events of the failure", n)
	}
	// Sent again after an undeliverable message: the old status stays.
	if err := f.s.MessageSent(ctx, q.ID, outreach.Sent, "250", ""); err != nil {
		t.Fatal(err)
	}
	if m, _ := f.s.Message(ctx, q.ID); m.Status != outreach.Undeliverable {
		t.Fatalf("a late 'sent' overwrote %s", m.Status)
	}
}

func TestBulkMessagesSkipWhoCannotReceive(t *testing.T) {
	f := outreachFixture(t, 3)
	ctx := context.Background()
	mustExec(t, f.s, `UPDATE participant_identity SET email = '' WHERE participant_id = $1`, f.pids["P2"])
	refs := []db.CaseRef{{ID: f.caseID("P1"), Version: 1}, {ID: f.caseID("P2"), Version: 1}, {ID: f.caseID("P3"), Version: 1}}
	got, err := f.s.QueueMessages(ctx, f.coord, refs, outreach.PurposeFirstContact, followup.ChannelEmail)
	if err != nil {
		t.Fatal(err)
	}
	if len(got.Queued) != 2 || len(got.Skipped) != 1 || got.Skipped[0].StudyID != "P2" || !strings.Contains(got.Skipped[0].Reason, "no e-mail address") {
		t.Fatalf("bulk %+v", got)
	}
	if n := f.count(`SELECT count(*) FROM contact_attempts`); n != 2 {
		t.Fatalf("%d attempts", n)
	}
	if n := f.count(`SELECT count(*) FROM audit_events WHERE action = 'participant.view_phi'`); n != 2 {
		t.Fatalf("%d PHI views audited, want 2 (the skipped case's rolled back with it)", n)
	}
	// A stale selection refuses everything.
	_, err = f.s.QueueMessages(ctx, f.coord, refs, outreach.PurposeReminder, followup.ChannelEmail)
	var ce *cohort.ConflictError
	if !errors.As(err, &ce) {
		t.Fatalf("stale bulk: %v", err)
	}
	if n := f.count(`SELECT count(*) FROM messages`); n != 2 {
		t.Fatalf("%d messages after a refused bulk send", n)
	}
}

func TestLettersArePrintedOnceAndPostedOnce(t *testing.T) {
	f := outreachFixture(t, 3)
	ctx := context.Background()
	mustExec(t, f.s, `UPDATE participant_identity SET street = '' WHERE participant_id = $1`, f.pids["P3"])
	refs := []db.CaseRef{{ID: f.caseID("P1")}, {ID: f.caseID("P2")}, {ID: f.caseID("P3")}}
	batch, skipped, err := f.s.PrintLetters(ctx, f.coord, refs, outreach.PurposeFirstContact, outreach.PaperLetter)
	if err != nil {
		t.Fatal(err)
	}
	if len(skipped) != 1 || skipped[0].StudyID != "P3" || !strings.Contains(skipped[0].Reason, "no postal address") {
		t.Fatalf("skipped %+v", skipped)
	}
	letters, err := f.s.LetterBatchLetters(ctx, f.coord, batch)
	if err != nil || len(letters) != 2 {
		t.Fatalf("letters %d %v", len(letters), err)
	}
	if got := strings.Join(letters[0].Address, "|"); got != "WrenP1 Alderby|1 Mill Lane|Riverside 55501" {
		t.Fatalf("address %q", got)
	}
	if n := f.count(`SELECT count(*) FROM contact_attempts`); n != 0 {
		t.Fatal("printing recorded attempts")
	}
	// A case changed after printing (someone logged a call) is still recorded.
	if _, err := f.s.LogAttempt(ctx, f.coord, f.caseID("P1"), db.AttemptInput{Version: 1, Channel: followup.ChannelPhone, Outcome: followup.OutcomeNoAnswer}); err != nil {
		t.Fatal(err)
	}
	n, err := f.s.PostLetters(ctx, f.coord, batch)
	if err != nil || n != 2 {
		t.Fatalf("posted %d %v", n, err)
	}
	if got := f.count(`SELECT count(*) FROM messages WHERE channel = 'letter' AND status = 'sent' AND letter_batch_id = $1`, batch); got != 2 {
		t.Fatalf("%d letter messages", got)
	}
	if got := f.count(`SELECT count(*) FROM contact_attempts WHERE channel = 'letter'`); got != 2 {
		t.Fatalf("%d letter attempts", got)
	}
	_, err = f.s.PostLetters(ctx, f.coord, batch)
	var ce *cohort.ConflictError
	if !errors.As(err, &ce) || !strings.Contains(ce.Message, "recorded as posted by") {
		t.Fatalf("second posting: %v", err)
	}
	if got := f.count(`SELECT count(*) FROM messages`); got != 2 {
		t.Fatalf("%d messages after posting twice", got)
	}
	b, err := f.s.LetterBatch(ctx, batch)
	if err != nil || b.PostedAt.IsZero() || len(b.Cases) != 2 {
		t.Fatalf("batch %+v %v", b, err)
	}
}

func TestTemplatesAreVersionedAndWarnOnWords(t *testing.T) {
	f := outreachFixture(t, 1)
	ctx := context.Background()
	admin := cohort.Actor{UserID: 0, Name: "admin test", Role: cohort.Admin}
	in := db.TemplateInput{Template: outreach.Template{Purpose: outreach.PurposeReminder, Channel: followup.ChannelEmail,
		Subject: "Hello again", Body: "Dear {{first_name}}, your screening result: please call. {{contact_line}}", ReplyDays: 5}, BasedOn: 1}
	_, err := f.s.SaveTemplate(ctx, admin, in)
	var ww *db.WordWarnings
	if !errors.As(err, &ww) || len(ww.Warnings) != 1 || ww.Warnings[0].Term != "result*" {
		t.Fatalf("unconfirmed words: %v", err)
	}
	in.Confirmed = true
	v2, err := f.s.SaveTemplate(ctx, admin, in)
	if err != nil || v2.Version != 2 {
		t.Fatalf("v2: %+v %v", v2, err)
	}
	if _, err := f.s.SaveTemplate(ctx, admin, in); err == nil || !errors.Is(err, cohort.ErrConflict) {
		t.Fatalf("a save based on v1 after v2: %v", err)
	}
	// A sent message names the version it was made from.
	q, err := f.s.QueueMessage(ctx, f.coord, f.caseID("P1"), db.MessageInput{Version: 1, Purpose: outreach.PurposeReminder, Channel: followup.ChannelEmail})
	if err != nil {
		t.Fatal(err)
	}
	if m, _ := f.s.Message(ctx, q.ID); m.TemplateVersion != 2 || m.TemplateID != v2.ID {
		t.Fatalf("message made from v%d", m.TemplateVersion)
	}
	// Saved versions never change.
	if _, err := f.s.Pool().Exec(ctx, `UPDATE message_templates SET body = 'x' WHERE id = $1`, v2.ID); err == nil {
		t.Fatal("a saved template was changed")
	}
	// The word list is the study's to keep.
	if err := f.s.SaveOutreachWords(ctx, admin, outreach.WordList{Terms: []string{"call"}}); err != nil {
		t.Fatal(err)
	}
	in.BasedOn, in.Confirmed = 2, false
	_, err = f.s.SaveTemplate(ctx, admin, in)
	if !errors.As(err, &ww) || ww.Warnings[0].Term != "call" {
		t.Fatalf("the saved list is not used: %v", err)
	}
	// A word of the list in the study's own name reaches every message of a
	// template that fills it in: a warning too, named by its placeholder.
	if err := f.s.SaveOutreachWords(ctx, admin, outreach.DefaultWords()); err != nil {
		t.Fatal(err)
	}
	saveSettings(t, f.s, func(st *db.StudySettings) {
		st.Name, st.ContactRoute = "Irregular Heartbeat Study", "call 555-0100 on working days"
	})
	named := db.TemplateInput{Template: outreach.Template{Purpose: outreach.PurposeReminder, Channel: followup.ChannelEmail,
		Subject: "Hello again", Body: "Dear {{first_name}}, a message from {{study_name}}. {{contact_line}}", ReplyDays: 5}, BasedOn: 2}
	_, err = f.s.SaveTemplate(ctx, admin, named)
	if !errors.As(err, &ww) || len(ww.Warnings) == 0 || ww.Warnings[0].Value != outreach.StudyName {
		t.Fatalf("a study name holding words of the list: %v", err)
	}
}

func TestReconcileFailsStrandedMessages(t *testing.T) {
	f := outreachFixture(t, 1)
	ctx := context.Background()
	q, err := f.s.QueueMessage(ctx, f.coord, f.caseID("P1"), db.MessageInput{Version: 1, Purpose: outreach.PurposeFirstContact, Channel: followup.ChannelEmail})
	if err != nil {
		t.Fatal(err)
	}
	mustExec(t, f.s, `UPDATE jobs SET state = 'failed', finished_at = now(), error = 'worker w stopped renewing its lease' WHERE kind = 'message.send'`)
	n, err := f.s.ReconcileMessages(ctx)
	if err != nil || n != 1 {
		t.Fatalf("reconciled %d %v", n, err)
	}
	if m, _ := f.s.Message(ctx, q.ID); m.Status != outreach.Failed || !strings.Contains(m.Detail, "stopped renewing") {
		t.Fatalf("message %s %q", m.Status, m.Detail)
	}
}

// The outbox's counts by status are kept as messages are written and
// change status (migration 0093): after queueing, a try, a refusal, a
// delivery and a folded ledger they equal a count of the messages table.
func TestOutboxCountsAreKept(t *testing.T) {
	f := outreachFixture(t, 3)
	ctx := context.Background()
	check := func(step string) {
		t.Helper()
		want := map[outreach.Status]int{}
		rows, err := f.s.Pool().Query(ctx, `SELECT status, count(*) FROM messages GROUP BY 1`)
		if err != nil {
			t.Fatal(err)
		}
		for rows.Next() {
			var st string
			var n int
			rows.Scan(&st, &n)
			want[outreach.Status(st)] = n
		}
		rows.Close()
		o, err := f.s.Outbox(ctx, db.OutboxFilter{})
		if err != nil {
			t.Fatal(err)
		}
		if len(o.Counts) != len(want) {
			t.Errorf("%s: outbox counts %v, the table %v", step, o.Counts, want)
		}
		for st, n := range want {
			if o.Counts[st] != n {
				t.Errorf("%s: outbox counts %v, the table %v", step, o.Counts, want)
				break
			}
		}
		for st, n := range want {
			one, err := f.s.Outbox(ctx, db.OutboxFilter{Status: st})
			if err != nil {
				t.Fatal(err)
			}
			if len(one.Rows) != n {
				t.Errorf("%s: the %s list holds %d messages, want %d", step, st, len(one.Rows), n)
			}
		}
	}
	check("none")
	var ids []int64
	for _, sid := range []string{"P1", "P2", "P3"} {
		q, err := f.s.QueueMessage(ctx, f.coord, f.caseID(sid), db.MessageInput{Version: 1, Purpose: outreach.PurposeFirstContact, Channel: followup.ChannelEmail})
		if err != nil {
			t.Fatal(err)
		}
		ids = append(ids, q.ID)
	}
	check("three queued")
	if _, _, ok, err := f.s.BeginTry(ctx, ids[0]); err != nil || !ok {
		t.Fatal(err, ok)
	}
	if err := f.s.MessageSent(ctx, ids[0], outreach.Sent, "250", ""); err != nil {
		t.Fatal(err)
	}
	if err := f.s.MessageNotDelivered(ctx, ids[1], outreach.Undeliverable, "550 5.1.1 mailbox unavailable"); err != nil {
		t.Fatal(err)
	}
	check("one sent, one undeliverable")
	if err := f.s.CompactLedgers(ctx); err != nil {
		t.Fatal(err)
	}
	check("ledger folded")
}
