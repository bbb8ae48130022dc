package web

import (
	"context"
	"errors"
	"fmt"
	"net/http"
	"strconv"
	"strings"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
	"cohortdesk/cohort/outreach"
	"cohortdesk/db"
	"cohortdesk/views"
)

// The study's message templates, kept by administrators: the templates in
// use, the placeholders, the word list, and each template's versions with a
// preview and the editor of the next version.

// templateStore is what the template pages need from the database.
type templateStore interface {
	MessageTemplates(ctx context.Context) ([]db.MessageTemplate, error)
	MessageTemplate(ctx context.Context, id int) (db.MessageTemplate, error)
	TemplateVersions(ctx context.Context, p outreach.Purpose, c followup.Channel) ([]db.MessageTemplate, error)
	SaveTemplate(ctx context.Context, a cohort.Actor, in db.TemplateInput) (db.MessageTemplate, error)
	TemplatePreview(ctx context.Context, a cohort.Actor, id int, studyID string) (outreach.Message, error)
	OutreachWords(ctx context.Context) (outreach.WordList, error)
	SaveOutreachWords(ctx context.Context, a cohort.Actor, w outreach.WordList) error
}

func init() {
	doneMessages["template"] = "New version saved; messages from now on are made from it."
	doneMessages["words"] = "Word list saved."
	views.RegisterAdminLink("/admin/templates", "Message templates: the wording of e-mails, text messages and letters to participants, the word list")
	views.RegisterAdminLink("/outbox", "Outbox: messages to participants and their status")
}

// WordingRule is the rule every message to a participant follows, as the
// template pages state it.
const WordingRule = "Messages to participants never state a diagnosis or a screening result: beyond asking them to contact the study team, " +
	"they say nothing about their health. Subjects are fixed text and never carry health information. The editor warns on the words " +
	"of the study's list in a body and refuses them in a subject."

func templateHref(id int) string { return "/admin/templates/" + strconv.Itoa(id) }

// templatesList is the templates page.
func (s *Server) templatesList(w http.ResponseWriter, r *http.Request) error {
	return s.renderTemplates(w, r, http.StatusOK, nil, "")
}

func (s *Server) renderTemplates(w http.ResponseWriter, r *http.Request, status int, errs map[string]string, words string) error {
	ctx := r.Context()
	ts, err := s.store.MessageTemplates(ctx)
	if err != nil {
		return err
	}
	list, err := s.store.OutreachWords(ctx)
	if err != nil {
		return err
	}
	if errs == nil {
		words = list.Text()
	}
	m := views.TemplatesModel{Page: s.page(r, "Message templates", "admin"), Words: words, Errors: errs, Rule: WordingRule}
	m.Page.Flash = doneMessages[r.URL.Query().Get("done")]
	for _, t := range ts {
		m.Rows = append(m.Rows, views.TemplateRowView{Href: templateHref(t.ID), Purpose: t.Purpose.Label(), Channel: t.Channel.Label(),
			Version: t.Version, Subject: t.Subject, By: t.CreatedBy, Warns: len(t.Warnings(list))})
	}
	for _, p := range outreach.Placeholders() {
		m.Placeholders = append(m.Placeholders, views.PlaceholderView{Tag: p.Tag(), Meaning: p.Meaning(), Example: p.Example()})
	}
	for _, p := range outreach.Purposes() {
		var tags []string
		for _, ph := range p.Required() {
			tags = append(tags, ph.Tag())
		}
		m.Required = append(m.Required, views.Option{Value: p.Label(), Label: strings.Join(tags, " and ")})
	}
	s.render(w, r, status, views.Templates(m))
	return nil
}

// templateWords saves the word list.
func (s *Server) templateWords(w http.ResponseWriter, r *http.Request) error {
	if err := r.ParseForm(); err != nil {
		return err
	}
	text := r.PostForm.Get("words")
	list, err := outreach.ParseWords(text)
	if err == nil {
		err = s.store.SaveOutreachWords(r.Context(), s.actor(r), list)
	}
	if err != nil {
		f, ok := refused(r, err, nil)
		if !ok {
			return err
		}
		return s.renderTemplates(w, r, f.Status, f.Fields, text)
	}
	http.Redirect(w, r, "/admin/templates?done=words", http.StatusSeeOther)
	return nil
}

// templateShow is one version: its text, a preview (with a participant's
// values when asked for), its history and the editor of the next version.
func (s *Server) templateShow(w http.ResponseWriter, r *http.Request) error {
	id, err := idParam(r)
	if err != nil {
		return err
	}
	t, err := s.store.MessageTemplate(r.Context(), int(id))
	if err != nil {
		return err
	}
	vals := map[string]string{"subject": t.Subject, "body": t.Body, "reply_days": strconv.Itoa(t.ReplyDays)}
	return s.renderTemplate(w, r, t, http.StatusOK, nil, "", vals, nil)
}

func (s *Server) renderTemplate(w http.ResponseWriter, r *http.Request, t db.MessageTemplate, status int, errs map[string]string, msg string,
	vals map[string]string, warnings []outreach.Warning) error {
	ctx := r.Context()
	hist, err := s.store.TemplateVersions(ctx, t.Purpose, t.Channel)
	if err != nil {
		return err
	}
	st, err := s.store.StudySettings(ctx)
	if err != nil {
		return err
	}
	m := views.TemplateModel{Page: s.page(r, t.Purpose.Label()+" by "+t.Channel.Label(), "admin"), ID: t.ID, Href: templateHref(t.ID),
		Title: "Template: " + t.Label(), Purpose: string(t.Purpose), Channel: string(t.Channel), Version: t.Version, Subject: t.Subject,
		Body: t.Body, ReplyDays: t.ReplyDays, Note: t.Note, IsText: t.Channel == followup.ChannelText, Errors: errs, Message: msg, Values: vals,
		CanPreview: role(r).SeesPHI(), PreviewFor: "example values"}
	m.Page.Flash = doneMessages[r.URL.Query().Get("done")]
	for _, w := range warnings {
		m.Warnings = append(m.Warnings, w.String())
	}
	if len(hist) > 0 {
		m.Latest = hist[0].Version
	}
	for _, h := range hist {
		m.History = append(m.History, views.TemplateVersionView{Href: templateHref(h.ID), Version: h.Version, By: h.CreatedBy,
			At: when(h.CreatedAt, st.Location()), Note: h.Note, Current: h.Version == m.Latest})
	}
	sid := strings.TrimSpace(r.URL.Query().Get("participant"))
	var preview outreach.Message
	if sid != "" && m.CanPreview {
		m.Participant, m.PreviewFor = sid, "the values of "+sid
		preview, err = s.store.TemplatePreview(ctx, s.actor(r), t.ID, sid)
	} else {
		preview, err = t.Render(outreach.ExampleValues())
	}
	var ve *cohort.ValidationError
	switch {
	case errors.As(err, &ve):
		for _, f := range []string{"participant", "message"} {
			if m.PreviewErr == "" {
				m.PreviewErr = ve.Fields[f]
			}
		}
	case err != nil:
		return err
	}
	m.Preview, m.PreviewSubj = preview.Body, preview.Subject
	s.render(w, r, status, views.Template(m))
	return nil
}

// templateSave saves the next version of a template. Words of the list in
// the body show the form again with the warnings and a box to confirm them.
func (s *Server) templateSave(w http.ResponseWriter, r *http.Request) error {
	if err := r.ParseForm(); err != nil {
		return err
	}
	f := readForm(r.PostForm)
	in := db.TemplateInput{Template: outreach.Template{Purpose: outreach.Purpose(f.text("purpose")), Channel: followup.Channel(f.text("channel")),
		Subject: f.raw("subject"), Body: f.raw("body")}, Note: f.raw("note"), Confirmed: f.ticked("confirm")}
	in.ReplyDays = f.whole("reply_days")
	in.BasedOn = f.whole("based_on")
	vals := map[string]string{"subject": in.Subject, "body": in.Body, "reply_days": f.text("reply_days"), "note": in.Note}
	err := f.check(nil)
	var saved db.MessageTemplate
	if err == nil {
		saved, err = s.store.SaveTemplate(r.Context(), s.actor(r), in)
	}
	if err == nil {
		http.Redirect(w, r, templateHref(saved.ID)+"?done=template", http.StatusSeeOther)
		return nil
	}
	// Show the version the editor started from, with what they wrote.
	versions, lerr := s.store.TemplateVersions(r.Context(), in.Purpose, in.Channel)
	if lerr != nil {
		return lerr
	}
	if len(versions) == 0 {
		return fmt.Errorf("web: save template: %w", err)
	}
	base := versions[0]
	for _, v := range versions {
		if v.Version == in.BasedOn {
			base = v
		}
	}
	var ww *db.WordWarnings
	if errors.As(err, &ww) {
		return s.renderTemplate(w, r, base, http.StatusUnprocessableEntity, map[string]string{}, "", vals, ww.Warnings)
	}
	no, ok := refused(r, err, nil)
	if !ok {
		return err
	}
	return s.renderTemplate(w, r, base, no.Status, no.Fields, no.Message, vals, nil)
}
