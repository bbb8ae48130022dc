package web

import (
	"bytes"
	"context"
	"fmt"
	"io"
	"net/http"
	"net/url"
	"regexp"
	"strings"
	"testing"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
	"cohortdesk/cohort/outreach"
	"cohortdesk/db"
	"cohortdesk/db/dbtest"
)

// outreachApp is a test app whose server sends e-mail and text messages (the
// jobs are not run here: web/outreach's tests send them) over n cases with
// contact details on file.
func outreachApp(t *testing.T, n int) (*app, []int64) {
	t.Helper()
	a := newApp(t)
	a.srv.outreach = OutreachConfig{Email: true, Text: true, ReceiptToken: "receipt-token"}
	return a, dbtest.OutreachCases(t, a.store, n)
}

func (a *app) count(sql string, args ...any) int {
	a.t.Helper()
	var n int
	if err := a.store.Pool().QueryRow(context.Background(), sql, args...).Scan(&n); err != nil {
		a.t.Fatalf("%s: %v", sql, err)
	}
	return n
}

// TestSendFromTheCasePage: a coordinator sends a first-contact e-mail from
// the case page; the case shows it in its timeline with its channel,
// template version and status, the attempt is logged, a second send from the
// same copy of the page is refused as stale and nothing is sent twice; the
// message as written opens for roles that see PHI, audited, and never for a
// monitor.
func TestSendFromTheCasePage(t *testing.T) {
	a, cases := outreachApp(t, 2)
	coord := a.signIn(cohort.Coordinator)
	path := fmt.Sprintf("/cases/%d", cases[0])
	_, page := a.get(coord, path)
	for _, want := range []string{`data-testid="form-message"`, `data-testid="reach-email">can be used`, "21:00 to 08:00 in UTC"} {
		if !strings.Contains(page, want) {
			t.Fatalf("the case page lacks %s", want)
		}
	}
	form := url.Values{"version": {"1"}, "purpose": {"first_contact"}, "channel": {"email"}}
	if res := a.postForm(coord, path+"/messages", form); res.StatusCode != http.StatusSeeOther {
		t.Fatalf("send: status %d", res.StatusCode)
	}
	_, page = a.get(coord, path+"?done=message")
	for _, want := range []string{"E-mail queued: first contact (template v1)", "Contact attempt by e-mail: message left", "Message queued"} {
		if !strings.Contains(page, want) {
			t.Errorf("the case page lacks %q", want)
		}
	}
	res, body := a.postFormBody(coord, path+"/messages", form)
	if res.StatusCode != http.StatusConflict || !strings.Contains(body, "logged a contact attempt") {
		t.Fatalf("a second send from the same copy: status %d", res.StatusCode)
	}
	if n := a.count(`SELECT count(*) FROM messages`); n != 1 {
		t.Fatalf("%d messages, want 1", n)
	}
	id := regexp.MustCompile(`/messages/(\d+)`).FindStringSubmatch(page)
	if id == nil {
		t.Fatal("no link to the message as written")
	}
	res, body = a.get(coord, "/messages/"+id[1])
	if res.StatusCode != http.StatusOK || !strings.Contains(body, "rv-0001@example.org") || !strings.Contains(body, "Dear Wren") {
		t.Fatalf("the message page: %d", res.StatusCode)
	}
	if n := a.count(`SELECT count(*) FROM audit_events WHERE action = 'participant.view_phi' AND new_value->>'purpose' = $1`, "message "+id[1]); n != 1 {
		t.Fatalf("%d audited views of the message", n)
	}
	if res, _ := a.get(a.signIn(cohort.Monitor), "/messages/"+id[1]); res.StatusCode != http.StatusForbidden {
		t.Fatalf("a monitor opened the message: %d", res.StatusCode)
	}
	// What cannot go says why, beside the field.
	res, body = a.postFormBody(coord, fmt.Sprintf("/cases/%d/messages", cases[1]), url.Values{"version": {"1"}, "purpose": {"first_contact"}, "channel": {"text_message"}})
	if res.StatusCode != http.StatusUnprocessableEntity || !strings.Contains(body, "has not agreed to be contacted by text message") {
		t.Fatalf("a text without consent: %d", res.StatusCode)
	}
	// A server without e-mail says so.
	a.srv.outreach.Email = false
	res, body = a.postFormBody(coord, fmt.Sprintf("/cases/%d/messages", cases[1]), url.Values{"version": {"1"}, "purpose": {"first_contact"}, "channel": {"email"}})
	if res.StatusCode != http.StatusUnprocessableEntity || !strings.Contains(body, "e-mail is not set up on this server") {
		t.Fatalf("no e-mail set up: %d", res.StatusCode)
	}
}

// TestContactPreferencesOnTheCasePage: an opt-out recorded on the case page
// stops e-mail to the participant, and the page says why.
func TestContactPreferencesOnTheCasePage(t *testing.T) {
	a, cases := outreachApp(t, 1)
	coord := a.signIn(cohort.Coordinator)
	var pid int64
	a.store.Pool().QueryRow(context.Background(), `SELECT participant_id FROM cases WHERE id = $1`, cases[0]).Scan(&pid)
	form := url.Values{"version": {"0"}, "back": {fmt.Sprintf("/cases/%d", cases[0])}, "preferred": {"letter"},
		"consent_email": {"on"}, "optout_email": {"on"}, "consent_letter": {"on"}, "consent_phone": {"on"}, "quiet_from": {"20:00"}, "quiet_until": {"09:30"}}
	if res := a.postForm(coord, fmt.Sprintf("/participants/%d/contact-preferences", pid), form); res.StatusCode != http.StatusSeeOther {
		t.Fatalf("save preferences: %d", res.StatusCode)
	}
	_, page := a.get(coord, fmt.Sprintf("/cases/%d", cases[0]))
	for _, want := range []string{"not now: the participant opted out of e-mails", "20:00 to 09:30 in UTC", "Last recorded by Test Coordinator"} {
		if !strings.Contains(page, want) {
			t.Errorf("case page lacks %q", want)
		}
	}
	res, body := a.postFormBody(coord, fmt.Sprintf("/cases/%d/messages", cases[0]), url.Values{"version": {"1"}, "purpose": {"first_contact"}, "channel": {"email"}})
	if res.StatusCode != http.StatusUnprocessableEntity || !strings.Contains(body, "opted out of e-mails") {
		t.Fatalf("e-mail after an opt-out: %d", res.StatusCode)
	}
	// A stale copy of the preferences is refused; a bad time is named.
	res, _ = a.postFormBody(coord, fmt.Sprintf("/participants/%d/contact-preferences", pid), form)
	if res.StatusCode != http.StatusConflict {
		t.Fatalf("stale preferences: %d", res.StatusCode)
	}
	form.Set("version", "1")
	form.Set("quiet_from", "late")
	res, body = a.postFormBody(coord, fmt.Sprintf("/participants/%d/contact-preferences", pid), form)
	if res.StatusCode != http.StatusUnprocessableEntity || !strings.Contains(body, `id="quiet_from-error"`) {
		t.Fatalf("a bad time: %d", res.StatusCode)
	}
}

// TestBulkMessagesAndPrintedLetters: the case list sends to the ticked
// cases, naming the ones skipped; it prints their letters as one PDF, one
// page per letter, and records the letters printed as posted once.
func TestBulkMessagesAndPrintedLetters(t *testing.T) {
	a, cases := outreachApp(t, 3)
	coord := a.signIn(cohort.Coordinator)
	a.exec(`UPDATE participant_identity SET email = '', street = '' WHERE participant_id = (SELECT participant_id FROM cases WHERE id = $1)`, cases[2])
	sel := url.Values{"case": {fmt.Sprintf("%d:1", cases[0]), fmt.Sprintf("%d:1", cases[1]), fmt.Sprintf("%d:1", cases[2])},
		"bulk-purpose": {"first_contact"}, "bulk-channel": {"email"}, "bulk-paper": {"letter"}}
	res, body := a.postFormBody(coord, "/cases/bulk/messages", sel)
	if res.StatusCode != http.StatusOK || !strings.Contains(body, "2 messages queued") || !strings.Contains(body, "RV-0003: no e-mail address is on file") {
		t.Fatalf("bulk send: %d", res.StatusCode)
	}
	// The list's versions moved on: print from fresh selections.
	sel.Set("case", fmt.Sprintf("%d:2", cases[0]))
	sel.Add("case", fmt.Sprintf("%d:2", cases[1]))
	sel.Add("case", fmt.Sprintf("%d:1", cases[2]))
	res = a.postForm(coord, "/cases/bulk/letters", sel)
	loc := res.Header.Get("Location")
	if res.StatusCode != http.StatusSeeOther || !strings.HasPrefix(loc, "/letters/") {
		t.Fatalf("print: %d %s", res.StatusCode, loc)
	}
	_, page := a.get(coord, loc)
	if !strings.Contains(page, "RV-0003: no postal address is on file") || !strings.Contains(page, "Record 2 letters as posted") {
		t.Fatalf("the batch page:\n%s", page)
	}
	res, err := coord.Get(a.ts.URL + loc + "/pdf")
	if err != nil {
		t.Fatal(err)
	}
	pdf, _ := io.ReadAll(res.Body)
	res.Body.Close()
	if res.Header.Get("Content-Type") != "application/pdf" {
		t.Fatalf("pdf: %s", res.Header.Get("Content-Type"))
	}
	text := pdfText(t, pdf)
	if got := strings.Count(text, "\f"); got != 2 {
		t.Fatalf("%d pages, want one per letter (2)", got)
	}
	for _, want := range []string{"RV-0001", "RV-0002", "Riverside Rhythm Study"} {
		if !strings.Contains(text, want) {
			t.Errorf("the letters lack %q", want)
		}
	}
	if bytes.Contains(pdf, []byte("RV-0003")) {
		t.Error("the skipped case has a letter")
	}
	if n := a.count(`SELECT count(*) FROM audit_events WHERE action = 'participant.view_phi' AND new_value->>'purpose' LIKE 'letter batch %'`); n != 2 {
		t.Fatalf("%d audited views of the letters", n)
	}
	if res := a.postForm(coord, loc+"/posted", nil); res.StatusCode != http.StatusSeeOther {
		t.Fatalf("posted: %d", res.StatusCode)
	}
	if n := a.count(`SELECT count(*) FROM messages WHERE channel = 'letter' AND status = 'sent'`); n != 2 {
		t.Fatalf("%d letters recorded", n)
	}
	if res, body := a.postFormBody(coord, loc+"/posted", nil); res.StatusCode != http.StatusConflict || !strings.Contains(body, "recorded as posted by Test Coordinator") {
		t.Fatalf("posted twice: %d", res.StatusCode)
	}
	if n := a.count(`SELECT count(*) FROM contact_attempts WHERE channel = 'letter'`); n != 2 {
		t.Fatalf("%d letter attempts after posting twice", n)
	}
	_, page = a.get(coord, "/outbox")
	if !strings.Contains(page, `data-testid="outbox-queued"`) || !strings.Contains(page, "letter: first contact") {
		t.Fatal("the outbox does not list the messages")
	}
}

// TestTemplateEditor: an administrator previews a template with a real
// participant's values (audited), and saves a new version; words of the
// list stop the save until confirmed, a health word in a subject and an
// unknown placeholder are refused beside their fields.
func TestTemplateEditor(t *testing.T) {
	a, _ := outreachApp(t, 1)
	admin := a.signIn(cohort.Admin)
	_, page := a.get(admin, "/admin/templates")
	if !strings.Contains(page, "never state a diagnosis or a screening result") || !strings.Contains(page, "{{tracking_number}}") {
		t.Fatal("the templates page lacks the rule or the placeholders")
	}
	var id int
	a.store.Pool().QueryRow(context.Background(), `SELECT id FROM message_templates WHERE purpose = 'first_contact' AND channel = 'email'`).Scan(&id)
	_, page = a.get(admin, fmt.Sprintf("/admin/templates/%d?participant=RV-0001", id))
	if !strings.Contains(page, "Dear Wren1,") || !strings.Contains(page, "call 555-0100") {
		t.Fatalf("preview with a participant:\n%s", page)
	}
	if n := a.count(`SELECT count(*) FROM audit_events WHERE action = 'participant.view_phi' AND new_value->>'purpose' = 'template preview'`); n != 1 {
		t.Fatalf("%d audited previews", n)
	}
	base := url.Values{"purpose": {"first_contact"}, "channel": {"email"}, "based_on": {"1"}, "reply_days": {"5"},
		"subject": {"Please get in touch"}, "body": {"Dear {{first_name}}, about your result: {{contact_line}} by {{reply_by}}."}}
	res, body := a.postFormBody(admin, "/admin/templates", base)
	if res.StatusCode != http.StatusUnprocessableEntity || !strings.Contains(body, `data-testid="template-warnings"`) || !strings.Contains(body, `&#34;result*&#34; is on the study&#39;s word list`) {
		t.Fatalf("unconfirmed words: %d\n%s", res.StatusCode, body)
	}
	bad := url.Values{}
	for k, v := range base {
		bad[k] = v
	}
	bad.Set("subject", "About your heart")
	bad.Set("body", "Dear {{first_name}}, {{diagnosis}} {{contact_line}} {{reply_by}}")
	res, body = a.postFormBody(admin, "/admin/templates", bad)
	if res.StatusCode != http.StatusUnprocessableEntity || !strings.Contains(body, `id="subject-error"`) || !strings.Contains(body, "unknown placeholder {{diagnosis}}") {
		t.Fatalf("a health word in the subject, an unknown placeholder: %d", res.StatusCode)
	}
	base.Set("confirm", "on")
	res = a.postForm(admin, "/admin/templates", base)
	if res.StatusCode != http.StatusSeeOther {
		t.Fatalf("confirmed save: %d", res.StatusCode)
	}
	if n := a.count(`SELECT count(*) FROM message_templates WHERE purpose = 'first_contact' AND channel = 'email'`); n != 2 {
		t.Fatalf("%d versions", n)
	}
	// The word list is the study's to keep.
	if res := a.postForm(admin, "/admin/templates/words", url.Values{"words": {"heart\nresult*"}}); res.StatusCode != http.StatusSeeOther {
		t.Fatalf("save words: %d", res.StatusCode)
	}
	if res, _ := a.postFormBody(admin, "/admin/templates/words", url.Values{"words": {"<b>"}}); res.StatusCode != http.StatusUnprocessableEntity {
		t.Fatalf("a bad word: %d", res.StatusCode)
	}
	if res, _ := a.get(a.signIn(cohort.Coordinator), "/admin/templates"); res.StatusCode != http.StatusForbidden {
		t.Fatal("a coordinator opened the template editor")
	}
}

// TestDeliveryReceipts: a gateway's receipt with the token records the
// message as delivered; without it, or for an unknown message, nothing
// changes.
func TestDeliveryReceipts(t *testing.T) {
	a, cases := outreachApp(t, 1)
	ctx := context.Background()
	var pid int64
	a.store.Pool().QueryRow(ctx, `SELECT participant_id FROM cases WHERE id = $1`, cases[0]).Scan(&pid)
	p := outreach.Defaults()
	p.Consent[followup.ChannelText] = true
	coordActor := cohort.Actor{UserID: a.users[cohort.Coordinator].ID, Name: "Test Coordinator", Role: cohort.Coordinator}
	if _, err := a.store.SaveContactPreferences(ctx, coordActor, pid, 0, p); err != nil {
		t.Fatal(err)
	}
	coord := a.signIn(cohort.Coordinator)
	if res := a.postForm(coord, fmt.Sprintf("/cases/%d/messages", cases[0]), url.Values{"version": {"1"}, "purpose": {"first_contact"}, "channel": {"text_message"}}); res.StatusCode != http.StatusSeeOther {
		t.Fatalf("send a text: %d", res.StatusCode)
	}
	var key string
	a.store.Pool().QueryRow(ctx, `SELECT idempotency_key::text FROM messages`).Scan(&key)
	post := func(token, body string) int {
		req, _ := http.NewRequest("POST", a.ts.URL+"/outreach/receipts", strings.NewReader(body))
		req.Header.Set("Content-Type", "application/json")
		if token != "" {
			req.Header.Set("Authorization", "Bearer "+token)
		}
		res, err := http.DefaultClient.Do(req)
		if err != nil {
			t.Fatal(err)
		}
		res.Body.Close()
		return res.StatusCode
	}
	good := fmt.Sprintf(`{"reference": %q, "status": "delivered", "detail": "handset confirmed"}`, key)
	if got := post("", good); got != http.StatusUnauthorized {
		t.Fatalf("no token: %d", got)
	}
	if got := post("wrong", good); got != http.StatusUnauthorized {
		t.Fatalf("wrong token: %d", got)
	}
	if got := post("receipt-token", `{"reference": "00000000-0000-0000-0000-000000000000", "status": "delivered"}`); got != http.StatusNotFound {
		t.Fatalf("unknown message: %d", got)
	}
	if got := post("receipt-token", fmt.Sprintf(`{"reference": %q, "status": "opened"}`, key)); got != http.StatusUnprocessableEntity {
		t.Fatalf("unknown status: %d", got)
	}
	if got := post("receipt-token", good); got != http.StatusNoContent {
		t.Fatalf("receipt: %d", got)
	}
	if n := a.count(`SELECT count(*) FROM messages WHERE status = 'delivered' AND detail = 'handset confirmed'`); n != 1 {
		t.Fatal("the receipt was not recorded")
	}
}

// TestMorningSummaryChoice: the triage page offers the morning summary and
// records the choice.
func TestMorningSummaryChoice(t *testing.T) {
	a, _ := outreachApp(t, 1)
	coord := a.signIn(cohort.Coordinator)
	_, page := a.get(coord, "/triage")
	if !strings.Contains(page, "E-mail me a morning summary") {
		t.Fatal("triage does not offer the morning summary")
	}
	if res := a.postForm(coord, "/account/morning-summary", url.Values{"on": {"on"}}); res.StatusCode != http.StatusSeeOther {
		t.Fatalf("turn on: %d", res.StatusCode)
	}
	if n := a.count(`SELECT count(*) FROM users WHERE morning_summary`); n != 1 {
		t.Fatal("not recorded")
	}
	_, page = a.get(coord, "/triage?done=summary-on")
	if !strings.Contains(page, "Stop the morning summary") || !strings.Contains(page, "You will get the morning summary") {
		t.Fatal("triage does not show the choice made")
	}
}

// TestTriageRowOffersTheSuggestedMessage: an open case's triage row offers
// a first-contact e-mail in one step; a participant who cannot get one is
// told why instead.
func TestTriageRowOffersTheSuggestedMessage(t *testing.T) {
	a, cases := outreachApp(t, 2)
	a.exec(`UPDATE participant_identity SET email = '' WHERE participant_id = (SELECT participant_id FROM cases WHERE id = $1)`, cases[1])
	coord := a.signIn(cohort.Coordinator)
	_, page := a.get(coord, "/triage")
	if !strings.Contains(page, "E-mail: first contact") {
		t.Fatal("no one-step first contact")
	}
	if !strings.Contains(page, "no message: no e-mail address is on file for the participant") {
		t.Fatal("the row without an e-mail address does not say why")
	}
	// An htmx send answers with the row.
	req, _ := http.NewRequest("POST", a.ts.URL+fmt.Sprintf("/cases/%d/messages", cases[0]),
		strings.NewReader(url.Values{"version": {"1"}, "purpose": {"first_contact"}, "channel": {"email"}, "view": {"triage"}}.Encode()))
	req.Header.Set("Content-Type", "application/x-www-form-urlencoded")
	req.Header.Set("HX-Request", "true")
	res, err := coord.Do(req)
	if err != nil {
		t.Fatal(err)
	}
	row, _ := io.ReadAll(res.Body)
	res.Body.Close()
	// The answer is the whole board: the case has left the new flags, so a
	// notice says what was done and where the case went.
	board := string(row)
	if res.StatusCode != http.StatusOK || !strings.Contains(board, `data-testid="board-notice"`) || !strings.Contains(board, "Message queued") ||
		strings.Contains(board, fmt.Sprintf(`data-testid="triage-row-%d"`, cases[0])) {
		t.Fatalf("the board after sending: %d\n%s", res.StatusCode, row)
	}
}

// outreachPages adds the outreach pages to the accessibility fixture: a
// message queued on a working case of the demo, a printed letter batch, the
// outbox and the template pages.
func outreachPages(t *testing.T, a *app) []a11yPage {
	t.Helper()
	ctx := context.Background()
	a.srv.outreach = OutreachConfig{Email: true, Text: true}
	if err := a.store.EnsureDefaultTemplates(ctx); err != nil {
		t.Fatal(err)
	}
	u := a.users[cohort.Coordinator]
	coord := u.Actor("127.0.0.1", "a11y")
	var caseID int64
	var version int
	if err := a.store.Pool().QueryRow(ctx, `SELECT c.id, c.version FROM cases c JOIN participant_identity i ON i.participant_id = c.participant_id
		WHERE c.closed_at IS NULL AND i.email <> '' AND i.street <> '' ORDER BY c.id LIMIT 1`).Scan(&caseID, &version); err != nil {
		t.Fatalf("a working case with contact details in the demo: %v", err)
	}
	q, err := a.store.QueueMessage(ctx, coord, caseID, db.MessageInput{Version: version, Purpose: outreach.PurposeReminder, Channel: followup.ChannelEmail})
	if err != nil {
		t.Fatal(err)
	}
	batch, _, err := a.store.PrintLetters(ctx, coord, []db.CaseRef{{ID: caseID}}, outreach.PurposeReminder, outreach.PaperA4)
	if err != nil {
		t.Fatal(err)
	}
	var tpl int
	a.store.Pool().QueryRow(ctx, `SELECT id FROM message_templates ORDER BY id LIMIT 1`).Scan(&tpl)
	return []a11yPage{
		{"outbox", "/outbox", "/outbox"},
		{"message", "/messages/{id}", fmt.Sprintf("/messages/%d", q.ID)},
		{"letter batch", "/letters/{id}", fmt.Sprintf("/letters/%d", batch)},
		{"case page with a message", "/cases/{id}", fmt.Sprintf("/cases/%d", caseID)},
		{"message templates", "/admin/templates", "/admin/templates"},
		{"message template", "/admin/templates/{id}", fmt.Sprintf("/admin/templates/%d", tpl)},
	}
}
