package web

import (
	"crypto/subtle"
	"encoding/json"
	"fmt"
	"io"
	"net/http"
	"strconv"
	"strings"
	"time"

	"cohortdesk/cohort/outreach"
	"cohortdesk/db"
	"cohortdesk/views"
	"cohortdesk/views/components"

	"github.com/a-h/templ"
)

// The outbox page, one message's page, the morning-summary choice and the
// text gateway's delivery receipts.

func messageTone(st outreach.Status) string {
	switch st {
	case outreach.Sent, outreach.Delivered:
		return string(components.OK)
	case outreach.Undeliverable, outreach.Failed:
		return string(components.Alarm)
	}
	return string(components.Info)
}

// outbox lists recent messages and counts them by status.
func (s *Server) outbox(w http.ResponseWriter, r *http.Request) error {
	status := outreach.Status(r.URL.Query().Get("status"))
	ob, err := s.store.Outbox(r.Context(), db.OutboxFilter{Status: status})
	if err != nil {
		return err
	}
	st, err := s.store.StudySettings(r.Context())
	if err != nil {
		return err
	}
	m := views.OutboxModel{Page: s.page(r, "Outbox", "cases"), Status: string(status), Statuses: []views.Option{{Value: "", Label: "all"}}}
	for _, x := range outreach.Statuses() {
		m.Counts = append(m.Counts, views.Option{Value: string(x), Label: strconv.Itoa(ob.Counts[x])})
		m.Statuses = append(m.Statuses, views.Option{Value: string(x), Label: x.Label()})
	}
	for _, msg := range ob.Rows {
		m.Rows = append(m.Rows, views.MessageRowView{ID: msg.ID, Href: fmt.Sprintf("/messages/%d", msg.ID), CaseHref: fmt.Sprintf("/cases/%d", msg.CaseID),
			StudyID: msg.StudyID, Channel: msg.Channel.Label(), Purpose: msg.Purpose.Label(), Template: "v" + strconv.Itoa(msg.TemplateVersion),
			Status: messageStatusLabel(msg), Tone: messageTone(msg.Status), When: when(msg.CreatedAt, st.Location()), Detail: msg.Detail})
	}
	return s.ok(w, r, views.Outbox(m))
}

// messageStatusLabel words a message's status with what qualifies it:
// held for quiet hours, the tries, a resend.
func messageStatusLabel(m db.Message) string {
	out := m.Status.Label()
	if m.Status == outreach.Queued && m.Held {
		out += " (held for quiet hours)"
	}
	if m.Tries > 1 {
		out += fmt.Sprintf(", %d tries", m.Tries)
	}
	if m.Resent {
		out += ", sent again after an unrecorded try"
	}
	return out
}

// messageShow is one message as written: its recipient and body are the
// participant's details, so reading them is audited (db.MessageContent).
func (s *Server) messageShow(w http.ResponseWriter, r *http.Request) error {
	id, err := idParam(r)
	if err != nil {
		return err
	}
	msg, c, err := s.store.MessageContent(r.Context(), s.actor(r), id)
	if err != nil {
		return err
	}
	st, err := s.store.StudySettings(r.Context())
	if err != nil {
		return err
	}
	loc := st.Location()
	m := views.MessageModel{Page: s.page(r, "Message to "+msg.StudyID, "cases"), StudyID: msg.StudyID, CaseHref: fmt.Sprintf("/cases/%d", msg.CaseID),
		Recipient: c.Recipient, Subject: c.Subject, Body: c.Body}
	m.Facts = []views.FactView{
		{Label: "Channel", Value: msg.Channel.Label()},
		{Label: "Message", Value: msg.Purpose.Label()},
		{Label: "Template", Value: fmt.Sprintf("version %d", msg.TemplateVersion)},
		{Label: "Status", Value: messageStatusLabel(msg)},
		{Label: "Queued", Value: when(msg.CreatedAt, loc) + " by " + msg.Actor},
		{Label: "Message-ID / key", Value: msg.Key},
	}
	if msg.Held {
		m.Facts = append(m.Facts, views.FactView{Label: "Held until", Value: when(msg.SendAfter, loc)})
	}
	if !msg.SentAt.IsZero() {
		m.Facts = append(m.Facts, views.FactView{Label: "Sent", Value: when(msg.SentAt, loc)})
	}
	if msg.Detail != "" {
		m.Facts = append(m.Facts, views.FactView{Label: "Answer", Value: msg.Detail})
	}
	return s.ok(w, r, views.Message(m))
}

// morning is the triage page's morning-summary choice.
func (s *Server) morning(r *http.Request) (templ.Component, error) {
	u, _ := userFrom(r.Context())
	on, err := s.store.MorningSummaryWanted(r.Context(), u.ID)
	if err != nil {
		return nil, err
	}
	return views.Morning(views.MorningModel{On: on, Enabled: s.outreach.Email}), nil
}

// morningSummary turns the signed-in person's morning summary on or off.
func (s *Server) morningSummary(w http.ResponseWriter, r *http.Request) error {
	if err := r.ParseForm(); err != nil {
		return err
	}
	u, _ := userFrom(r.Context())
	on := r.PostForm.Get("on") == "on"
	if err := s.store.SetMorningSummary(r.Context(), s.actor(r), u.ID, on); err != nil {
		return err
	}
	done := "summary-off"
	if on {
		done = "summary-on"
	}
	http.Redirect(w, r, "/triage?done="+done, http.StatusSeeOther)
	return nil
}

// receipt is a delivery receipt as a text gateway posts it.
type receipt struct {
	Reference string `json:"reference"` // the message's idempotency key
	Status    string `json:"status"`    // delivered, undeliverable or failed
	Detail    string `json:"detail"`
}

// deliveryReceipt records a text gateway's later answer about a message:
// JSON {"reference", "status", "detail"} with the configured bearer token.
// It answers 204 when recorded, 404 for an unknown reference, 401 without
// the token, 422 for a status it does not know.
func (s *Server) deliveryReceipt(w http.ResponseWriter, r *http.Request) error {
	token := strings.TrimPrefix(r.Header.Get("Authorization"), "Bearer ")
	if s.outreach.ReceiptToken == "" || subtle.ConstantTimeCompare([]byte(token), []byte(s.outreach.ReceiptToken)) != 1 {
		http.Error(w, "a delivery receipt needs the gateway's token", http.StatusUnauthorized)
		return nil
	}
	var rc receipt
	if err := json.NewDecoder(io.LimitReader(r.Body, 16<<10)).Decode(&rc); err != nil {
		http.Error(w, "the receipt is not JSON: "+err.Error(), http.StatusBadRequest)
		return nil
	}
	st, err := outreach.ParseStatus(rc.Status)
	if err != nil || (st != outreach.Delivered && !st.NotDelivered()) {
		http.Error(w, "status must be delivered, undeliverable or failed", http.StatusUnprocessableEntity)
		return nil
	}
	found, err := s.store.MessageReceipt(r.Context(), rc.Reference, st, rc.Detail)
	if err != nil {
		return err
	}
	if !found {
		http.Error(w, "no message has that reference", http.StatusNotFound)
		return nil
	}
	w.WriteHeader(http.StatusNoContent)
	return nil
}

// messageEntry words a message on the case timeline: channel, purpose,
// template version, status, and a link to the message as written.
func messageEntry(out views.TimelineEntry, m db.Message, loc *time.Location) views.TimelineEntry {
	ch := m.Channel.Label()
	out.Title = strings.ToUpper(ch[:1]) + ch[1:] + " " + m.Status.Label() + ": " + m.Purpose.Label() + " (template v" + strconv.Itoa(m.TemplateVersion) + ")"
	out.Lines = []string{"status: " + messageStatusLabel(m)}
	if m.Status == outreach.Queued && m.Held {
		out.Lines = append(out.Lines, "held until "+when(m.SendAfter, loc)+", the end of the participant's quiet hours")
	}
	if !m.SentAt.IsZero() {
		out.Lines = append(out.Lines, "sent "+when(m.SentAt, loc))
	}
	if m.Detail != "" {
		out.Lines = append(out.Lines, "answer: "+m.Detail)
	}
	if m.Resent {
		out.Lines = append(out.Lines, "sent again after a try whose end was not recorded: the participant may have two copies with the same Message-ID")
	}
	out.Href, out.HrefLabel = fmt.Sprintf("/messages/%d", m.ID), "the message as written"
	return out
}
