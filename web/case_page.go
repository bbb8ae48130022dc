package web

import (
	"fmt"
	"net/http"
	"slices"
	"strconv"
	"strings"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
	"cohortdesk/cohort/overread"
	"cohortdesk/cohort/screen"
	"cohortdesk/db"
	"cohortdesk/views"
)

// A case's page: its facts, the participant's contact details, the forms of
// the steps the case offers the signed-in person, its weeks and timeline.

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
		Today: cal.DateOf(now).String(), Now: now.Format("2006-01-02T15:04"), Tracking: c.TrackingNumber}
	offers := followup.Offers(c.State, role(r))
	offered := func(s followup.Step) bool { return slices.Contains(offers, s) }
	m.Actions = len(offers) > 0
	m.CanAssign, m.CanAttempt, m.CanShip, m.CanReturn, m.CanNote =
		offered(followup.StepAssign), offered(followup.StepAttempt), offered(followup.StepShipment), offered(followup.StepReturn), offered(followup.StepNote)
	if msg == "" {
		m.Flash = doneMessages[r.URL.Query().Get("done")]
	}
	due, _ := dueView(c, cal, now, false)
	day := func(t time.Time) string {
		if t.IsZero() {
			return "—"
		}
		return cohort.TimeLabel(t, loc)
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
		{Label: "Due", Value: strings.TrimPrefix(due, "due "), Testid: "case-due"},
		{Label: "Reached", Value: day(c.ReachedAt)},
		{Label: "Recorder sent", Value: day(c.RecorderSentAt), Testid: "case-sent"},
		{Label: "Tracking number", Value: c.TrackingNumber, Testid: "case-tracking"},
		{Label: "Recording back", Value: day(c.RecordingBackAt)},
		{Label: "Over-read", Value: day(c.OverReadAt)},
	}
	if c.UnreadRecordings > 0 {
		m.Facts = append(m.Facts, views.FactView{Label: "Waiting for an over-read", Value: cohort.Plural(c.UnreadRecordings, "recording")})
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
	m.Channels = channelOptions
	m.Outcomes = append([]views.Option{{Value: "", Label: "choose…"}}, outcomeOptions...)
	for _, n := range followup.HandMoves(c.State) {
		switch {
		case n.Terminal() && offered(followup.StepClose):
			m.Closings = append(m.Closings, views.Option{Value: string(n), Label: n.Label()})
		case !n.Terminal() && offered(followup.StepMove):
			m.Moves = append(m.Moves, views.Option{Value: string(n), Label: n.Label()})
		}
	}
	if len(m.Closings) > 0 {
		// No closing is chosen for the person: they say how the case ends.
		m.Closings = append([]views.Option{{Value: "", Label: "choose how it ends…"}}, m.Closings...)
	}
	if len(m.Moves) > 0 {
		m.Moves = append([]views.Option{{Value: "", Label: "choose a state…"}}, m.Moves...)
	}
	weeks, err := s.store.FlaggedWeeks(ctx, c.ParticipantID)
	if err != nil {
		return err
	}
	for _, w := range weeks {
		v := views.FlaggedWeekView{Week: w.Week, Protocol: screen.VersionLabel(w.ProtocolName, w.ProtocolVersion), Reason: w.Why,
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
	if m.Outreach, err = s.caseOutreach(r, c, errs, now); err != nil {
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
	out := views.TimelineEntry{At: cohort.TimeLabel(e.At, loc), Kind: string(e.Kind), Actor: e.Actor}
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
		if a := overread.Auto(rec.AutoInterpretation); a != "" && a != overread.AutoNoReading {
			out.Lines = append(out.Lines, overread.AutoHeading+": "+a.Label())
		}
		if rec.TooShort {
			out.Lines = append(out.Lines, "shorter than 30 s: not enough for a diagnostic read")
		}
		if !rec.OverRead {
			out.Lines = append(out.Lines, "waiting for an over-read")
		}
	case db.EventMessage:
		out = messageEntry(out, *e.Message, loc)
	case db.EventOverRead:
		o := e.OverRead
		out.Title = fmt.Sprintf("Over-read (%s): %s, %s", overread.Role(o.Role).Label(), overread.Rhythm(o.Rhythm).Label(), o.Confidence)
		// A reading is placed on the day it was read; entered later, it
		// says when.
		out.At = o.ReadOn.Label()
		out.Lines = []string{"read on " + o.ReadOn.Label()}
		if cohort.DateOf(o.EnteredAt.In(loc)) != o.ReadOn {
			out.Lines = append(out.Lines, "entered "+cohort.TimeLabel(o.EnteredAt, loc))
		}
	default:
		w := e.Action.Label()
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
