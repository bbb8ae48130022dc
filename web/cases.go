package web

import (
	"context"
	"fmt"
	"net/http"
	"strconv"
	"strings"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
	"cohortdesk/db"
	"cohortdesk/views"
	"cohortdesk/views/components"
)

// The follow-up cases: the list and its bulk actions (cases_list.go), a
// case's page (case_page.go), the actions on one case (case_actions.go) and
// the triage page (triage.go). What a case offers to whom is
// followup.Offers; this file holds what they share.

// caseStore is what the case list, the case page, triage and their actions
// need from the database.
type caseStore interface {
	Case(ctx context.Context, id int64) (db.Case, error)
	Cases(ctx context.Context, f db.CaseFilter) (db.CasePage, error)
	Triage(ctx context.Context, perGroup int, me int64) (db.Triage, error)
	TriageCase(ctx context.Context, id, me int64) (db.Triage, error)
	CaseTimeline(ctx context.Context, c db.Case, loc *time.Location) ([]db.CaseEvent, error)
	FlaggedWeeks(ctx context.Context, participantID int64) ([]db.FlaggedWeek, error)
	CaseWorkers(ctx context.Context) ([]db.User, error)
	StudySettings(ctx context.Context) (db.StudySettings, error)
	AssignCase(ctx context.Context, a cohort.Actor, id int64, version int, ownerID int64) (db.Case, error)
	LogAttempt(ctx context.Context, a cohort.Actor, id int64, in db.AttemptInput) (db.Case, error)
	MoveCase(ctx context.Context, a cohort.Actor, id int64, in db.MoveInput) (db.Case, error)
	CloseCase(ctx context.Context, a cohort.Actor, id int64, in db.MoveInput) (db.Case, error)
	RecordShipment(ctx context.Context, a cohort.Actor, id int64, version int, sentOn cohort.Date, tracking string) (db.Case, error)
	RecordReturn(ctx context.Context, a cohort.Actor, id int64, version int, backOn cohort.Date) (db.Case, error)
	SetCaseNote(ctx context.Context, a cohort.Actor, id int64, version int, note string) (db.Case, error)
	AssignCases(ctx context.Context, a cohort.Actor, refs []db.CaseRef, ownerID int64) (int, error)
	LogLetters(ctx context.Context, a cohort.Actor, refs []db.CaseRef, note string) (int, error)
	CloseCasesForWithdrawal(ctx context.Context, a cohort.Actor, participantID int64) (int, error)
}

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
			return "overdue " + cohort.Plural(max(late, 0), "day"), components.Alarm
		}
		return "overdue, was due " + dayLabel(day), components.Alarm
	case day == today:
		return "due today", components.Warn
	case deid:
		return "due in " + cohort.Plural(day.DaysSince(today), "day"), components.Neutral
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
			row.Flagged = cohort.Plural(days, "day") + " ago"
		} else {
			row.Flagged = "today"
		}
		return row
	}
	row.Href = fmt.Sprintf("/cases/%d", c.ID)
	row.Owner, row.Note = c.Owner, c.Note
	row.Flagged = cal.DateOf(c.FlaggedAt).Label()
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

// channelOptions and outcomeOptions are the choices of the attempt forms,
// built once: the case page and every triage row share them.
var channelOptions, outcomeOptions = func() (ch, out []views.Option) {
	for _, c := range followup.Channels() {
		ch = append(ch, views.Option{Value: string(c), Label: c.Label()})
	}
	for _, o := range followup.Outcomes() {
		out = append(out, views.Option{Value: string(o), Label: o.Label()})
	}
	return ch, out
}()

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
