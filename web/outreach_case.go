package web

import (
	"context"
	"fmt"
	"maps"
	"net/http"
	"net/url"
	"slices"
	"strconv"
	"strings"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
	"cohortdesk/cohort/outreach"
	"cohortdesk/db"
	"cohortdesk/views"

	"github.com/a-h/templ"
)

// Sending messages from the desk: the case page's panel, the triage row's
// one-step message, the case list's bulk message, and the participant's
// contact preferences. What may go to whom is cohort/outreach's rule; the
// store writes the message with its contact attempt (db.QueueMessage) and a
// background job sends it (web/outreach).

// OutreachConfig says which channels this server sends on and how text
// gateways report deliveries.
type OutreachConfig struct {
	Email, Text  bool   // a transport is set up for the channel
	ReceiptToken string // bearer token of delivery receipts; "" refuses them all
}

// outreachStore is what sending needs from the database.
type outreachStore interface {
	QueueMessage(ctx context.Context, a cohort.Actor, id int64, in db.MessageInput) (db.QueuedMessage, error)
	QueueMessages(ctx context.Context, a cohort.Actor, refs []db.CaseRef, p outreach.Purpose, ch followup.Channel) (db.BulkMessages, error)
	ContactPreferences(ctx context.Context, participantID int64) (db.ContactPreferences, error)
	SaveContactPreferences(ctx context.Context, a cohort.Actor, participantID int64, version int, p outreach.Preferences) (db.ContactPreferences, error)
	Reaches(ctx context.Context, caseIDs []int64) (map[int64]db.Reach, error)
	PrintLetters(ctx context.Context, a cohort.Actor, refs []db.CaseRef, p outreach.Purpose, paper outreach.Paper) (int64, []db.SkippedCase, error)
	LetterBatch(ctx context.Context, id int64) (db.LetterBatch, error)
	LetterBatchLetters(ctx context.Context, a cohort.Actor, id int64) ([]db.Letter, error)
	PostLetters(ctx context.Context, a cohort.Actor, id int64) (int, error)
	Message(ctx context.Context, id int64) (db.Message, error)
	MessageContent(ctx context.Context, a cohort.Actor, id int64) (db.Message, db.MessageContent, error)
	Outbox(ctx context.Context, f db.OutboxFilter) (db.Outbox, error)
	MessageReceipt(ctx context.Context, key string, st outreach.Status, detail string) (bool, error)
	MorningSummaryWanted(ctx context.Context, userID int64) (bool, error)
	SetMorningSummary(ctx context.Context, a cohort.Actor, userID int64, on bool) error
	templateStore
}

func init() {
	maps.Copy(doneMessages, map[string]string{
		"message":     "Message queued: it is sent in the background (held to the end of the participant's quiet hours where they apply) and shows in the timeline.",
		"preferences": "Contact preferences saved.",
		"posted":      "Letters recorded as posted.",
		"summary-on":  "You will get the morning summary on working days.",
		"summary-off": "The morning summary is off.",
	})
}

// purposeOptions lists the purposes, the suggested ones for a state first.
func purposeOptions(st followup.State) []views.Option {
	suggested := outreach.Suggested(st)
	var out []views.Option
	for _, p := range append(suggested, outreach.Purposes()...) {
		if !slices.ContainsFunc(out, func(o views.Option) bool { return o.Value == string(p) }) {
			out = append(out, views.Option{Value: string(p), Label: p.Label()})
		}
	}
	return out
}

func paperOptions() []views.Option {
	return []views.Option{{Value: outreach.PaperA4.Name, Label: "A4 (DL or C5 window envelope)"}, {Value: outreach.PaperLetter.Name, Label: "US Letter (No. 10 window envelope)"}}
}

// sendChannels are the channels the send forms offer: e-mail and text
// messages (letters are printed).
var sendChannels = []followup.Channel{followup.ChannelEmail, followup.ChannelText}

// configured says why this server cannot send on ch, "" when it can.
func (s *Server) configured(ch followup.Channel) string {
	switch {
	case ch == followup.ChannelEmail && !s.outreach.Email:
		return "e-mail is not set up on this server"
	case ch == followup.ChannelText && !s.outreach.Text:
		return "text messages are not set up on this server"
	}
	return ""
}

// reachWhy says why a message cannot go on ch to the participant reached
// as r at now, "" when it can (outreach.Decide's reason, or the server's).
func (s *Server) reachWhy(r db.Reach, ch followup.Channel, now time.Time) string {
	if why := s.configured(ch); why != "" {
		return why
	}
	if _, _, err := outreach.Decide(r.Preferences.Preferences, r.Contact, ch, now, r.Location); err != nil {
		if ve, ok := err.(*cohort.ValidationError); ok {
			return ve.Fields["channel"]
		}
		return err.Error()
	}
	return ""
}

// lastMessageLine words a case's latest message for a row or a notice.
func lastMessageLine(m *db.Message, loc *time.Location) (string, bool) {
	if m == nil {
		return "", false
	}
	return fmt.Sprintf("%s %s %s", m.Channel.Label(), m.Status.Label(), dayOf(m.CreatedAt, loc)), m.Status.NotDelivered()
}

// caseOutreach is the case page's panel of messages.
func (s *Server) caseOutreach(r *http.Request, c db.Case, errs map[string]string, now time.Time) (templ.Component, error) {
	reaches, err := s.store.Reaches(r.Context(), []int64{c.ID})
	if err != nil {
		return nil, err
	}
	rc := reaches[c.ID]
	p := rc.Preferences
	m := views.OutreachCaseModel{CaseID: c.ID, ParticipantID: c.ParticipantID, Version: c.Version, Errors: errs,
		CanSend: followup.Offered(c.State, role(r), followup.StepMessage), Purposes: purposeOptions(c.State),
		Recorded: p.Recorded, PrefVersion: p.Version, Papers: paperOptions(),
		QuietFrom: p.QuietFrom.String(), QuietUntil: p.QuietUntil.String(), PreferredVal: string(p.Preferred)}
	if len(m.Purposes) > 0 {
		m.Purpose = m.Purposes[0].Value
	}
	if p.Recorded {
		m.PrefBy = p.UpdatedBy + " on " + when(p.UpdatedAt, now.Location())
	}
	m.Preferred = "none named"
	if p.Preferred != "" {
		m.Preferred = p.Preferred.Label()
	}
	m.PrefChoices = []views.Option{{Value: "", Label: "none named"}}
	for _, ch := range followup.Channels() {
		m.PrefChoices = append(m.PrefChoices, views.Option{Value: string(ch), Label: ch.Label()})
		cr := views.ChannelReach{Value: string(ch), Label: ch.Label(), Consent: p.Consent[ch], OptOut: p.OptedOut[ch]}
		if ch == followup.ChannelPhone {
			cr.Allowed = p.Allows(ch) && rc.Contact.Phone
			if !cr.Allowed {
				cr.Why = "no agreement, an opt-out, or no number on file"
			}
		} else {
			cr.Why = s.reachWhy(rc, ch, now)
			cr.Allowed = cr.Why == ""
		}
		m.Reach = append(m.Reach, cr)
	}
	for _, ch := range sendChannels {
		m.Channels = append(m.Channels, views.Option{Value: string(ch), Label: ch.Label()})
	}
	m.Channel = string(followup.ChannelEmail)
	if slices.Contains(sendChannels, p.Preferred) {
		m.Channel = string(p.Preferred)
	}
	local := now.In(rc.Location)
	if p.QuietFrom == p.QuietUntil {
		m.Quiet = "none"
	} else {
		m.Quiet = fmt.Sprintf("%s to %s in %s (now %s there)", p.QuietFrom, p.QuietUntil, rc.Location, local.Format("15:04"))
	}
	if rc.Last != nil && rc.Last.Status.NotDelivered() {
		m.Failed = fmt.Sprintf("The %s of %s (%s) did not reach the participant: %s. %s", rc.Last.Channel.Label(),
			dayOf(rc.Last.CreatedAt, now.Location()), rc.Last.Purpose.Label(), rc.Last.Status.Label()+" ("+rc.Last.Detail+")",
			"Check the contact details, or try another channel.")
	}
	return views.OutreachCase(m), nil
}

// addOutreach gives each triage row its one-step message: the first
// purpose suggested for the case's state, on the participant's preferred
// channel if the desk can send there, else e-mail, else a text message; or
// why nothing can go.
func (s *Server) addOutreach(r *http.Request, rows []*views.TriageRowView) error {
	if len(rows) == 0 {
		return nil
	}
	ids := make([]int64, len(rows))
	for i, row := range rows {
		ids[i] = row.ID
	}
	reaches, err := s.store.Reaches(r.Context(), ids)
	if err != nil {
		return err
	}
	st, err := s.store.StudySettings(r.Context())
	if err != nil {
		return err
	}
	now := s.now()
	for _, row := range rows {
		rc, ok := reaches[row.ID]
		if !ok {
			continue
		}
		m := views.OutreachRowModel{CaseID: row.ID, StudyID: row.StudyID, Version: row.Version}
		m.Last, m.LastBad = lastMessageLine(rc.Last, st.Location())
		suggested := outreach.Suggested(rc.State)
		if !slices.Contains(followup.QuickSteps(rc.State, role(r)), followup.StepMessage) || len(suggested) == 0 {
			if m.Last != "" {
				row.Outreach = views.OutreachRow(m)
			}
			continue
		}
		order := []followup.Channel{followup.ChannelEmail, followup.ChannelText}
		if slices.Contains(order, rc.Preferences.Preferred) {
			order = append([]followup.Channel{rc.Preferences.Preferred}, order...)
		}
		var why string
		for _, ch := range order {
			if w := s.reachWhy(rc, ch, now); w == "" {
				m.Purpose, m.Channel = string(suggested[0]), string(ch)
				m.Label = strings.ToUpper(ch.Label()[:1]) + ch.Label()[1:] + ": " + suggested[0].Label()
				break
			} else if why == "" {
				why = w
			}
		}
		if m.Label == "" {
			m.Why = "no message: " + why
		}
		row.Outreach = views.OutreachRow(m)
	}
	return nil
}

// caseMessage sends one message from the case page or a triage row.
func (s *Server) caseMessage(w http.ResponseWriter, r *http.Request) error {
	return s.caseAction(w, r, "message", map[string]string{"channel": "message-channel", "purpose": "message-purpose"}, func(ctx context.Context, id int64, v int, f *formReader) error {
		in := db.MessageInput{Version: v, Purpose: outreach.Purpose(f.text("purpose")), Channel: followup.Channel(f.text("channel"))}
		if err := f.check(nil); err != nil {
			return err
		}
		if why := s.configured(in.Channel); why != "" {
			return fieldError("channel", why)
		}
		_, err := s.store.QueueMessage(ctx, s.actor(r), id, in)
		return err
	})
}

// casesBulkMessage sends one message to the ticked cases. Cases the message
// cannot go to are listed with the reason; the others are sent.
func (s *Server) casesBulkMessage(w http.ResponseWriter, r *http.Request) error {
	if err := r.ParseForm(); err != nil {
		return err
	}
	back, err := url.Parse(safeBack(r.PostForm.Get("back"), "/cases"))
	if err != nil {
		back = &url.URL{Path: "/cases"}
	}
	ch := followup.Channel(r.PostForm.Get("bulk-channel"))
	refs, err := caseRefs(r.PostForm["case"])
	var res db.BulkMessages
	if err == nil {
		if why := s.configured(ch); why != "" {
			err = fieldError("cases", why)
		} else {
			res, err = s.store.QueueMessages(r.Context(), s.actor(r), refs, outreach.Purpose(r.PostForm.Get("bulk-purpose")), ch)
		}
	}
	if err != nil {
		f, ok := refused(r, err, nil)
		if !ok {
			return err
		}
		return s.renderCases(w, r, back.Query(), f.Status, f.Message)
	}
	msg := fmt.Sprintf("%s queued.", cohort.Plural(len(res.Queued), "message"))
	if len(res.Skipped) > 0 {
		var parts []string
		for _, sk := range res.Skipped {
			parts = append(parts, sk.StudyID+": "+sk.Reason)
		}
		msg += " Not sent to " + cohort.Plural(len(res.Skipped), "case") + ": " + strings.Join(parts, "; ") + "."
	}
	q := back.Query()
	return s.renderCases(w, r, q, http.StatusOK, msg)
}

// bulkOutreach is the case list's bulk message and letter controls.
func bulkOutreach() templ.Component {
	m := views.BulkOutreachModel{Purposes: purposeOptions(""), Papers: paperOptions()}
	for _, ch := range sendChannels {
		m.Channels = append(m.Channels, views.Option{Value: string(ch), Label: ch.Label()})
	}
	return views.BulkOutreach(m)
}

// contactPreferencesSave records a participant's contact preferences from
// the case page's form and goes back to it.
func (s *Server) contactPreferencesSave(w http.ResponseWriter, r *http.Request) error {
	pid, err := idParam(r)
	if err != nil {
		return err
	}
	if err := r.ParseForm(); err != nil {
		return err
	}
	f := readForm(r.PostForm)
	p := outreach.Preferences{Preferred: followup.Channel(f.text("preferred")), Consent: map[followup.Channel]bool{}, OptedOut: map[followup.Channel]bool{}}
	for _, ch := range followup.Channels() {
		p.Consent[ch], p.OptedOut[ch] = f.ticked("consent_"+string(ch)), f.ticked("optout_"+string(ch))
	}
	var cerr error
	if p.QuietFrom, cerr = outreach.ParseClock(f.text("quiet_from")); cerr != nil {
		f.fail("quiet_from", "enter a time of day such as 21:00")
	}
	if p.QuietUntil, cerr = outreach.ParseClock(f.text("quiet_until")); cerr != nil {
		f.fail("quiet_until", "enter a time of day such as 08:00")
	}
	back := safeBack(r.PostForm.Get("back"), fmt.Sprintf("/participants/%d", pid))
	err = f.check(nil)
	if err == nil {
		_, err = s.store.SaveContactPreferences(r.Context(), s.actor(r), pid, f.version(), p)
	}
	if err != nil {
		no, ok := refused(r, err, nil)
		if !ok {
			return err
		}
		if caseID, cerr := strconv.ParseInt(strings.TrimPrefix(back, "/cases/"), 10, 64); cerr == nil {
			c, lerr := s.store.Case(r.Context(), caseID)
			if lerr != nil {
				return lerr
			}
			return s.renderCase(w, r, c, no.Status, no.Fields, no.Message)
		}
		return err
	}
	http.Redirect(w, r, back+"?done=preferences", http.StatusSeeOther)
	return nil
}

// triageOutreach adds the one-step messages to every row of the triage page
// and the morning-summary choice below it.
func (s *Server) triageOutreach(r *http.Request, m *views.TriageModel) error {
	var rows []*views.TriageRowView
	for gi := range m.Groups {
		for ri := range m.Groups[gi].Rows {
			rows = append(rows, &m.Groups[gi].Rows[ri])
		}
	}
	if err := s.addOutreach(r, rows); err != nil {
		return err
	}
	var err error
	m.Morning, err = s.morning(r)
	return err
}
