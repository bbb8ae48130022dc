package web

import (
	"context"
	"errors"
	"fmt"
	"net/http"
	"net/url"
	"strconv"
	"strings"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
	"cohortdesk/cohort/overread"
	"cohortdesk/db"
	"cohortdesk/views"
	"cohortdesk/views/components"
)

// caseStore is what the case list, the case page, triage and their actions
// need from the database.
type caseStore interface {
	Case(ctx context.Context, id int64) (db.Case, error)
	Cases(ctx context.Context, f db.CaseFilter) (db.CasePage, error)
	Triage(ctx context.Context, perGroup int) (db.Triage, error)
	TriageCase(ctx context.Context, id int64) (db.Triage, error)
	CaseTimeline(ctx context.Context, c db.Case, loc *time.Location) ([]db.CaseEvent, error)
	FlaggedWeeks(ctx context.Context, participantID int64) ([]db.FlaggedWeek, error)
	CaseWorkers(ctx context.Context) ([]db.User, error)
	StudySettings(ctx context.Context) (db.StudySettings, error)
	AssignCase(ctx context.Context, a cohort.Actor, id int64, version int, ownerID int64) (db.Case, error)
	LogAttempt(ctx context.Context, a cohort.Actor, id int64, in db.AttemptInput) (db.Case, error)
	MoveCase(ctx context.Context, a cohort.Actor, id int64, in db.MoveInput) (db.Case, error)
	CloseCase(ctx context.Context, a cohort.Actor, id int64, in db.MoveInput) (db.Case, error)
	RecordShipment(ctx context.Context, a cohort.Actor, id int64, version int, sentOn, tracking string) (db.Case, error)
	RecordReturn(ctx context.Context, a cohort.Actor, id int64, version int, backOn string) (db.Case, error)
	SetCaseNote(ctx context.Context, a cohort.Actor, id int64, version int, note string) (db.Case, error)
	AssignCases(ctx context.Context, a cohort.Actor, refs []db.CaseRef, ownerID int64) (int, error)
	LogLetters(ctx context.Context, a cohort.Actor, refs []db.CaseRef, note string) (int, error)
	CloseCasesForWithdrawal(ctx context.Context, a cohort.Actor, participantID int64) (int, error)
}

// caseStateLabel shows a stored case state in words.
func caseStateLabel(s string) string { return followup.State(s).Label() }

// afterWithdrawal closes the participant's cases still being worked as
// "closed (withdrawn)", each audited.
func (s *Server) afterWithdrawal(r *http.Request, participantID int64) error {
	_, err := s.store.CloseCasesForWithdrawal(r.Context(), s.actor(r), participantID)
	return err
}

// stateTone colours a state by what it asks of staff: open cases wait for
// someone, a returned recording waits for a clinician, ended cases are quiet.
func stateTone(st followup.State) components.Tone {
	switch {
	case st == followup.Open || st == followup.RecordingReceived:
		return components.Warn
	case st == followup.Referred:
		return components.OK
	case st.Terminal():
		return components.Neutral
	}
	return components.Info
}

// dueView words a case's deadline at now: overdue, today, or the day. The
// de-identified form counts days instead of naming dates.
func dueView(c db.Case, cal followup.Calendar, now time.Time, deid bool) (string, components.Tone) {
	if c.DueAt.IsZero() {
		return "", components.Neutral
	}
	today, day := cal.DateOf(now), cal.DueDay(c.DueAt)
	switch {
	case !now.Before(c.DueAt):
		late := today.DaysSince(day)
		if deid || late < 1 {
			return "overdue " + plural(max(late, 0), "day"), components.Alarm
		}
		return "overdue, was due " + dayLabel(day), components.Alarm
	case day == today:
		return "due today", components.Warn
	case deid:
		return "due in " + plural(day.DaysSince(today), "day"), components.Neutral
	}
	return "due " + dayLabel(day), components.Neutral
}

func weeksLabel(c db.Case) string {
	if c.FirstWeek == c.LastWeek {
		return strconv.Itoa(c.FirstWeek)
	}
	return strconv.Itoa(c.FirstWeek) + "–" + strconv.Itoa(c.LastWeek)
}

// caseRow builds a list row. De-identified rows (monitors) leave out the
// owner, the note and every date.
func caseRow(c db.Case, st db.StudySettings, now time.Time, deid bool) views.CaseRowView {
	cal := st.Calendar()
	due, tone := dueView(c, cal, now, deid)
	row := views.CaseRowView{ID: c.ID, StudyID: c.StudyID, Site: c.SiteCode, State: c.State.Label(), StateTone: stateTone(c.State),
		Weeks: weeksLabel(c), Due: due, DueTone: tone, Version: c.Version, Unread: c.UnreadRecordings}
	if c.NextAction != "" {
		row.NextAction = c.NextAction.Label()
	}
	if deid {
		if days := cal.DateOf(now).DaysSince(cal.DateOf(c.FlaggedAt)); days > 0 {
			row.Flagged = plural(days, "day") + " ago"
		} else {
			row.Flagged = "today"
		}
		return row
	}
	row.Href = fmt.Sprintf("/cases/%d", c.ID)
	row.Owner, row.Note = c.Owner, c.Note
	row.Flagged = cal.DateOf(c.FlaggedAt).String()
	return row
}

// workerOptions lists the people cases may be given to; withNobody adds the
// choice of giving a case back.
func workerOptions(us []db.User, withNobody bool) []views.Option {
	var out []views.Option
	if withNobody {
		out = append(out, views.Option{Value: "none", Label: "nobody"})
	}
	for _, u := range us {
		out = append(out, views.Option{Value: strconv.FormatInt(u.ID, 10), Label: u.Name + " (" + u.Role.Label() + ")"})
	}
	return out
}

// ownerParam reads an owner choice: "me", "none" for nobody, or an account
// id. Anything else (an unchosen placeholder) is -1, never an account, which
// the store refuses with a message.
func ownerParam(r *http.Request, v string) int64 {
	switch v = strings.TrimSpace(v); v {
	case "me":
		u, _ := userFrom(r.Context())
		return u.ID
	case "none":
		return 0
	}
	id, err := strconv.ParseInt(v, 10, 64)
	if err != nil {
		return -1 // never an account: the store refuses it with a message
	}
	return id
}

// caseFilter reads the case list's filter from the query string.
func caseFilter(r *http.Request, q url.Values, deid bool) (db.CaseFilter, views.CaseFilterForm) {
	form := views.CaseFilterForm{State: q.Get("state"), Owner: q.Get("owner"), Site: q.Get("site"), Overdue: q.Get("overdue") == "on"}
	f := db.CaseFilter{State: form.State, Overdue: form.Overdue, After: q.Get("after")}
	f.SiteID, _ = strconv.Atoi(form.Site)
	if !deid {
		switch form.Owner {
		case "":
		case "none":
			f.Unowned = true
		default:
			if id := ownerParam(r, form.Owner); id > 0 {
				f.OwnerID = id
			}
		}
	}
	return f, form
}

func stateOptions() []views.Option {
	out := []views.Option{{Value: "", Label: "still being worked"}, {Value: "final", Label: "ended"}, {Value: "all", Label: "all"}}
	for _, st := range followup.States() {
		out = append(out, views.Option{Value: string(st), Label: st.Label()})
	}
	return out
}

// doneMessages confirm an action after the redirect that follows it.
var doneMessages = map[string]string{
	"assign":   "Owner saved.",
	"attempt":  "Contact attempt logged.",
	"move":     "State changed.",
	"close":    "Case closed.",
	"shipment": "Recorder shipment recorded.",
	"return":   "Recording return recorded.",
	"note":     "Working note saved.",
	"letters":  "Letters recorded.",
	"bulk":     "Cases assigned.",
}

// casesList is the case list. Monitors see it de-identified: study IDs,
// states, study weeks and day counts, never owners, notes or dates, and no
// case pages (cohort.Role.SeesPHI decides).
func (s *Server) casesList(w http.ResponseWriter, r *http.Request) error {
	return s.renderCases(w, r, r.URL.Query(), http.StatusOK, "")
}

func (s *Server) renderCases(w http.ResponseWriter, r *http.Request, q url.Values, status int, msg string) error {
	ctx := r.Context()
	deid := !role(r).SeesPHI()
	f, form := caseFilter(r, q, deid)
	page, err := s.store.Cases(ctx, f)
	if err != nil {
		return err
	}
	st, err := s.store.StudySettings(ctx)
	if err != nil {
		return err
	}
	sites, _, err := s.siteOptions(ctx)
	if err != nil {
		return err
	}
	m := views.CasesModel{Page: s.page(r, "Cases", "cases"), Filter: form, States: stateOptions(), Sites: sites,
		Total: page.Total, DeIdentified: deid, Message: msg}
	if !deid {
		workers, err := s.store.CaseWorkers(ctx)
		if err != nil {
			return err
		}
		m.Owners = append([]views.Option{{Value: "", Label: "anyone"}, {Value: "me", Label: "me"}, {Value: "none", Label: "nobody yet"}}, workerOptions(workers, false)...)
		m.Assignees = workerOptions(workers, true)
		m.CanAssign, m.CanLetter = caseWork.allows(role(r)), coordWork.allows(role(r))
	}
	if d := doneMessages[q.Get("done")]; d != "" && msg == "" {
		m.Page.Flash = d
	}
	now := s.now().In(st.Location())
	for _, c := range page.Rows {
		m.Rows = append(m.Rows, caseRow(c, st, now, deid))
	}
	clean := url.Values{}
	for k, v := range q {
		if k != "done" && k != "after" {
			clean[k] = v
		}
	}
	m.Back = "/cases?" + clean.Encode()
	if page.Next != "" {
		nq := url.Values{}
		for k, v := range clean {
			nq[k] = v
		}
		nq.Set("after", page.Next)
		m.Next = "/cases?" + nq.Encode()
	}
	if f.After != "" {
		m.First = m.Back
	}
	s.render(w, r, status, views.Cases(m))
	return nil
}

// caseRefs reads the ticked boxes of the bulk form, each "id:version".
func caseRefs(values []string) ([]db.CaseRef, error) {
	out := make([]db.CaseRef, 0, len(values))
	for _, v := range values {
		a, b, ok := strings.Cut(v, ":")
		id, err1 := strconv.ParseInt(a, 10, 64)
		ver, err2 := strconv.Atoi(b)
		if !ok || err1 != nil || err2 != nil {
			return nil, &cohort.ValidationError{Fields: map[string]string{"cases": fmt.Sprintf("%q is not a case selection; reload the list", v)}}
		}
		out = append(out, db.CaseRef{ID: id, Version: ver})
	}
	return out, nil
}

// safeBack keeps a return address on this site.
func safeBack(v, fallback string) string {
	if !strings.HasPrefix(v, "/") || strings.HasPrefix(v, "//") || strings.Contains(v, `\`) {
		return fallback
	}
	return v
}

func (s *Server) casesBulkAssign(w http.ResponseWriter, r *http.Request) error {
	return s.casesBulk(w, r, "bulk", func(refs []db.CaseRef) (int, error) {
		return s.store.AssignCases(r.Context(), s.actor(r), refs, ownerParam(r, r.PostForm.Get("bulk-owner")))
	})
}

func (s *Server) casesBulkLetter(w http.ResponseWriter, r *http.Request) error {
	return s.casesBulk(w, r, "letters", func(refs []db.CaseRef) (int, error) {
		return s.store.LogLetters(r.Context(), s.actor(r), refs, r.PostForm.Get("note"))
	})
}

// casesBulk runs a bulk action and returns to the list; a refusal shows the
// list again with the reason, nothing having changed.
func (s *Server) casesBulk(w http.ResponseWriter, r *http.Request, done string, do func([]db.CaseRef) (int, error)) error {
	if err := r.ParseForm(); err != nil {
		return err
	}
	back := safeBack(r.PostForm.Get("back"), "/cases")
	refs, err := caseRefs(r.PostForm["case"])
	if err == nil {
		_, err = do(refs)
	}
	if err != nil {
		status := statusOf(err)
		if status != http.StatusUnprocessableEntity && status != http.StatusConflict {
			return err
		}
		u, perr := url.Parse(back)
		if perr != nil {
			u = &url.URL{Path: "/cases"}
		}
		return s.renderCases(w, r, u.Query(), status, humanMessage(err))
	}
	u, err := url.Parse(back)
	if err != nil {
		u = &url.URL{Path: "/cases"}
	}
	q := u.Query()
	q.Set("done", done)
	u.RawQuery = q.Encode()
	http.Redirect(w, r, u.String(), http.StatusSeeOther)
	return nil
}

// caseShow is a case's page. Opening it shows the participant's contact
// details, which is recorded as a view of PHI.
func (s *Server) caseShow(w http.ResponseWriter, r *http.Request) error {
	id, err := idParam(r)
	if err != nil {
		return err
	}
	c, err := s.store.Case(r.Context(), id)
	if err != nil {
		return err
	}
	return s.renderCase(w, r, c, http.StatusOK, nil, "")
}

func (s *Server) renderCase(w http.ResponseWriter, r *http.Request, c db.Case, status int, errs map[string]string, msg string) error {
	ctx := r.Context()
	st, err := s.store.StudySettings(ctx)
	if err != nil {
		return err
	}
	loc := st.Location()
	now := s.now().In(loc)
	cal := st.Calendar()
	m := views.CaseModel{Page: s.page(r, "Case "+c.StudyID, "cases"), ID: c.ID, StudyID: c.StudyID,
		ParticipantHref: fmt.Sprintf("/participants/%d", c.ParticipantID), State: c.State.Label(), StateTone: stateTone(c.State),
		Version: c.Version, Final: c.State.Terminal(), Note: c.Note, Errors: errs, Message: msg,
		CanContact: coordWork.allows(role(r)), CanShip: c.State == followup.Reached || c.State == followup.RecorderSent,
		CanReturn: c.State == followup.RecorderSent, Today: cal.DateOf(now).String(), Now: now.Format("2006-01-02T15:04"),
		Tracking: c.TrackingNumber}
	if msg == "" {
		m.Flash = doneMessages[r.URL.Query().Get("done")]
	}
	due, _ := dueView(c, cal, now, false)
	day := func(t time.Time) string {
		if t.IsZero() {
			return "—"
		}
		return t.In(loc).Format("2006-01-02 15:04 MST")
	}
	owner := c.Owner
	if owner == "" {
		owner = "nobody yet"
	}
	next := "nothing"
	if c.NextAction != "" {
		next = c.NextAction.Label()
	}
	m.Facts = []views.FactView{
		{Label: "Site", Value: c.SiteCode},
		{Label: "Study weeks", Value: weeksLabel(c), Testid: "case-weeks"},
		{Label: "Flagged", Value: day(c.FlaggedAt)},
		{Label: "Owner", Value: owner, Testid: "case-owner"},
		{Label: "Next action", Value: next, Testid: "case-next"},
		{Label: "Due", Value: due, Testid: "case-due"},
		{Label: "Reached", Value: day(c.ReachedAt)},
		{Label: "Recorder sent", Value: day(c.RecorderSentAt), Testid: "case-sent"},
		{Label: "Tracking number", Value: c.TrackingNumber, Testid: "case-tracking"},
		{Label: "Recording back", Value: day(c.RecordingBackAt)},
		{Label: "Over-read", Value: day(c.OverReadAt)},
		{Label: "Version", Value: strconv.Itoa(c.Version)},
	}
	if c.UnreadRecordings > 0 {
		m.Facts = append(m.Facts, views.FactView{Label: "Waiting for an over-read", Value: plural(c.UnreadRecordings, "recording")})
	}
	if m.Final {
		m.Facts = append(m.Facts, views.FactView{Label: "Closed", Value: day(c.ClosedAt)}, views.FactView{Label: "Closing reason", Value: c.ClosingNote})
	}
	ident, err := s.store.Identity(ctx, s.actor(r), c.ParticipantID, "case page")
	if err != nil {
		return err
	}
	m.Identity = []views.Fact{{Label: "Name", Value: ident.FullName()}, {Label: "Phone", Value: ident.Phone}, {Label: "E-mail", Value: ident.Email},
		{Label: "Address", Value: strings.Trim(strings.TrimSpace(ident.Street+", "+ident.City+" "+ident.ZIP), ", ")}}
	workers, err := s.store.CaseWorkers(ctx)
	if err != nil {
		return err
	}
	m.Owners = workerOptions(workers, true)
	if c.OwnerID != 0 {
		m.Me = strconv.FormatInt(c.OwnerID, 10)
	} else if u, ok := userFrom(ctx); ok {
		m.Me = strconv.FormatInt(u.ID, 10)
	}
	for _, ch := range followup.Channels() {
		m.Channels = append(m.Channels, views.Option{Value: string(ch), Label: ch.Label()})
	}
	m.Outcomes = []views.Option{{Value: "", Label: "choose…"}}
	for _, o := range followup.Outcomes() {
		m.Outcomes = append(m.Outcomes, views.Option{Value: string(o), Label: o.Label()})
	}
	for _, n := range followup.Next(c.State) {
		if n.Terminal() {
			m.Closings = append(m.Closings, views.Option{Value: string(n), Label: n.Label()})
		} else {
			m.Moves = append(m.Moves, views.Option{Value: string(n), Label: n.Label()})
		}
	}
	weeks, err := s.store.FlaggedWeeks(ctx, c.ParticipantID)
	if err != nil {
		return err
	}
	for _, w := range weeks {
		v := views.FlaggedWeekView{Week: w.Week, Protocol: fmt.Sprintf("%s v%d", w.ProtocolName, w.ProtocolVersion), Reason: w.Reason,
			WearHours: strconv.FormatFloat(w.WearHours, 'f', 1, 64), OnCase: w.CaseID == c.ID, Late: w.Late}
		if w.CaseID != 0 && w.CaseID != c.ID {
			v.Elsewhere = fmt.Sprintf("/cases/%d", w.CaseID)
		}
		for _, mt := range w.Metrics {
			v.Metrics = append(v.Metrics, views.Option{Value: mt.Name, Label: mt.Value})
		}
		m.Weeks = append(m.Weeks, v)
	}
	if m.ECG, err = s.caseECG(r, c, errs, now); err != nil {
		return err
	}
	events, err := s.store.CaseTimeline(ctx, c, loc)
	if err != nil {
		return err
	}
	for _, e := range events {
		m.Timeline = append(m.Timeline, timelineEntry(e, loc))
	}
	if referrals.allows(role(r)) {
		m.ReferralHref = fmt.Sprintf("/participants/%d/referral?case=%d", c.ParticipantID, c.ID)
	}
	s.render(w, r, status, views.Case(m))
	return nil
}

// timelineEntry words one timeline event.
func timelineEntry(e db.CaseEvent, loc *time.Location) views.TimelineEntry {
	out := views.TimelineEntry{At: e.At.In(loc).Format("2006-01-02 15:04 MST"), Kind: string(e.Kind), Actor: e.Actor}
	switch e.Kind {
	case db.EventAttempt:
		a := e.Attempt
		out.Title = "Contact attempt by " + a.Channel.Label() + ": " + a.Outcome.Label()
		if a.MovedTo != "" {
			out.Lines = []string{"case moved to " + a.MovedTo.Label()}
		}
		out.Note = a.Note
	case db.EventRecording:
		rec := e.Recording
		out.Title = fmt.Sprintf("ECG recording taken (%.0f s)", rec.DurationS)
		if rec.AutoInterpretation != "" && rec.AutoInterpretation != "none" {
			out.Lines = append(out.Lines, "recorder's own reading: "+overread.Auto(rec.AutoInterpretation).Label())
		}
		if rec.TooShort {
			out.Lines = append(out.Lines, "shorter than 30 s: not enough for a diagnostic read")
		}
		if !rec.OverRead {
			out.Lines = append(out.Lines, "waiting for an over-read")
		}
	case db.EventOverRead:
		o := e.OverRead
		out.Title = fmt.Sprintf("Over-read (%s): %s, %s", overread.Role(o.Role).Label(), overread.Rhythm(o.Rhythm).Label(), o.Confidence)
		out.Lines = []string{"read on " + o.ReadOn.String()}
	default:
		w := db.ActionWords(e.Action)
		out.Title = strings.ToUpper(w[:1]) + w[1:]
		for _, ch := range e.Changes {
			switch {
			case ch.Before == "":
				out.Lines = append(out.Lines, ch.Field+": "+ch.After)
			case ch.After == "":
				out.Lines = append(out.Lines, ch.Field+": "+ch.Before+" → (none)")
			default:
				out.Lines = append(out.Lines, ch.Field+": "+ch.Before+" → "+ch.After)
			}
		}
	}
	return out
}

// caseEditFunc runs one action given the case id, the version the page
// showed and the submitted form.
type caseEditFunc func(ctx context.Context, id int64, version int, f url.Values) error

// caseAction parses an action's form, runs it and answers as asked: the
// triage row for htmx requests from the triage page, else a redirect; a
// refused action shows its reason (with the case as it now is).
// fieldMap renames the store's field names to the form's where they differ.
func (s *Server) caseAction(w http.ResponseWriter, r *http.Request, done string, fieldMap map[string]string, do caseEditFunc) error {
	id, err := idParam(r)
	if err != nil {
		return err
	}
	if err := r.ParseForm(); err != nil {
		return err
	}
	version, _ := strconv.Atoi(r.PostForm.Get("version"))
	err = do(r.Context(), id, version, r.PostForm)
	fromTriage := r.PostForm.Get("view") == "triage"
	if fromTriage && r.Header.Get("HX-Request") == "true" {
		return s.triageRowAnswer(w, r, id, err, done)
	}
	if err != nil {
		status := statusOf(err)
		if status != http.StatusUnprocessableEntity && status != http.StatusConflict {
			return err
		}
		c, lerr := s.store.Case(r.Context(), id)
		if lerr != nil {
			return lerr
		}
		errs := map[string]string{}
		var ve *cohort.ValidationError
		if errors.As(err, &ve) {
			for f, msg := range ve.Fields {
				if to, ok := fieldMap[f]; ok {
					f = to
				}
				errs[f] = msg
			}
		}
		return s.renderCase(w, r, c, status, errs, humanMessage(err))
	}
	target := fmt.Sprintf("/cases/%d?done=%s", id, done)
	if fromTriage {
		target = fmt.Sprintf("/triage?done=%s#case-%d", done, id)
	}
	http.Redirect(w, r, target, http.StatusSeeOther)
	return nil
}

func (s *Server) caseAssign(w http.ResponseWriter, r *http.Request) error {
	return s.caseAction(w, r, "assign", nil, func(ctx context.Context, id int64, v int, f url.Values) error {
		_, err := s.store.AssignCase(ctx, s.actor(r), id, v, ownerParam(r, f.Get("owner")))
		return err
	})
}

func (s *Server) caseAttempt(w http.ResponseWriter, r *http.Request) error {
	return s.caseAction(w, r, "attempt", map[string]string{"note": "attempt-note"}, func(ctx context.Context, id int64, v int, f url.Values) error {
		_, err := s.store.LogAttempt(ctx, s.actor(r), id, db.AttemptInput{Version: v, Channel: f.Get("channel"), Outcome: f.Get("outcome"), Note: f.Get("note"), At: f.Get("at")})
		return err
	})
}

func (s *Server) caseMove(w http.ResponseWriter, r *http.Request) error {
	return s.caseAction(w, r, "move", nil, func(ctx context.Context, id int64, v int, f url.Values) error {
		_, err := s.store.MoveCase(ctx, s.actor(r), id, db.MoveInput{Version: v, To: f.Get("state"), Reason: f.Get("reason")})
		return err
	})
}

func (s *Server) caseClose(w http.ResponseWriter, r *http.Request) error {
	return s.caseAction(w, r, "close", map[string]string{"state": "close-state"}, func(ctx context.Context, id int64, v int, f url.Values) error {
		_, err := s.store.CloseCase(ctx, s.actor(r), id, db.MoveInput{Version: v, To: f.Get("close-state"), Reason: f.Get("reason")})
		return err
	})
}

func (s *Server) caseShipment(w http.ResponseWriter, r *http.Request) error {
	return s.caseAction(w, r, "shipment", nil, func(ctx context.Context, id int64, v int, f url.Values) error {
		_, err := s.store.RecordShipment(ctx, s.actor(r), id, v, f.Get("sent_on"), f.Get("tracking_number"))
		return err
	})
}

func (s *Server) caseReturn(w http.ResponseWriter, r *http.Request) error {
	return s.caseAction(w, r, "return", nil, func(ctx context.Context, id int64, v int, f url.Values) error {
		_, err := s.store.RecordReturn(ctx, s.actor(r), id, v, f.Get("back_on"))
		return err
	})
}

func (s *Server) caseNote(w http.ResponseWriter, r *http.Request) error {
	return s.caseAction(w, r, "note", nil, func(ctx context.Context, id int64, v int, f url.Values) error {
		_, err := s.store.SetCaseNote(ctx, s.actor(r), id, v, f.Get("note"))
		return err
	})
}
