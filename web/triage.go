package web

import (
	"fmt"
	"net/http"
	"slices"
	"strconv"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
	"cohortdesk/db"
	"cohortdesk/views"
)

// triageGroupLimit bounds the rows shown per group; the rest are a link away
// on the case list, so the page stays quick on a busy morning.
const triageGroupLimit = 25

// triageGroups are the page's groups, in the order of followup.Bucket.
var triageGroups = []struct {
	bucket followup.Bucket
	key    string
	title  string
	hint   string
	more   string
}{
	{followup.BucketOverdue, "overdue", "Overdue", "The next action's deadline has passed; the most overdue first.", "/cases?overdue=on"},
	{followup.BucketDueToday, "today", "Due today", "Deadlines that fall at the end of today in the study's time zone.", "/cases"},
	{followup.BucketNewUnowned, "new", "New flags nobody has taken on", "Open cases without an owner, oldest flag first.", "/cases?state=open&owner=none"},
	{followup.BucketAwaitingOverRead, "overread", "Recordings waiting for an over-read", "Recordings back from participants that no clinician has read yet, oldest first.", "/cases?state=recording_received"},
}

// triageRow builds one row with the one-click steps the case offers the
// signed-in person (followup.QuickSteps).
func (s *Server) triageRow(r *http.Request, t db.Triage, row db.TriageRow, workers []views.Option) views.TriageRowView {
	u, _ := userFrom(r.Context())
	quick := followup.QuickSteps(row.State, u.Role)
	offered := func(s followup.Step) bool { return slices.Contains(quick, s) }
	v := views.TriageRowView{CaseRowView: caseRow(row.Case, t.Settings, t.Now, false), Group: row.Bucket.Label(),
		Me: strconv.FormatInt(u.ID, 10), CanAssign: offered(followup.StepAssign), CanTake: offered(followup.StepAssign) && row.OwnerID != u.ID,
		CanAttempt: offered(followup.StepAttempt), CanShip: offered(followup.StepShipment),
		Assignees: workers, Today: t.Settings.Calendar().DateOf(t.Now).String()}
	if row.State.Terminal() {
		v.Group = "closed"
	}
	v.Channels, v.Outcomes = channelOptions, outcomeOptions
	return v
}

// triage is the coordinators' morning list: the urgent groups in the order of
// followup.Urgency, with counts and one-step actions.
func (s *Server) triage(w http.ResponseWriter, r *http.Request) error {
	ctx := r.Context()
	t, err := s.store.Triage(ctx, triageGroupLimit)
	if err != nil {
		return err
	}
	us, err := s.store.CaseWorkers(ctx)
	if err != nil {
		return err
	}
	workers := workerOptions(us, false)
	m := views.TriageModel{Page: s.page(r, "Triage", "triage"), OrderRule: followup.OrderRule, UnreadRecordings: t.UnreadRecordings,
		Scheduled: t.Counts[followup.BucketOther],
		AsOf:      fmt.Sprintf("As of %s, %s (%s).", dayLabel(t.Settings.Calendar().DateOf(t.Now)), cohort.ClockLabel(t.Now, t.Settings.Location()), t.Settings.Location())}
	m.Page.Flash = doneMessages[r.URL.Query().Get("done")]
	byBucket := map[followup.Bucket][]db.TriageRow{}
	for _, row := range t.Rows {
		byBucket[row.Bucket] = append(byBucket[row.Bucket], row)
	}
	for _, g := range triageGroups {
		tg := views.TriageGroup{Key: g.key, Title: g.title, Hint: g.hint, Count: t.Counts[g.bucket]}
		for _, row := range byBucket[g.bucket] {
			tg.Rows = append(tg.Rows, s.triageRow(r, t, row, workers))
		}
		if tg.Count > len(tg.Rows) {
			tg.More = g.more
		}
		m.Groups = append(m.Groups, tg)
	}
	return s.ok(w, r, views.Triage(m))
}

// triageRowAnswer answers an htmx action from the triage page with just the
// case's row as it now is, saying what happened or why nothing did. A refusal
// keeps its status (409, 422); the page script lets htmx swap those in.
func (s *Server) triageRowAnswer(w http.ResponseWriter, r *http.Request, id int64, actionErr error, done string) error {
	ctx := r.Context()
	t, err := s.store.TriageCase(ctx, id)
	if err != nil {
		return err
	}
	us, err := s.store.CaseWorkers(ctx)
	if err != nil {
		return err
	}
	row := s.triageRow(r, t, t.Rows[0], workerOptions(us, false))
	status := http.StatusOK
	if actionErr != nil {
		f, ok := refused(r, actionErr, nil)
		if !ok {
			return actionErr
		}
		status, row.Error = f.Status, f.Message
	} else {
		row.Done = doneMessages[done] + " Now: " + row.Group + "."
	}
	s.render(w, r, status, views.TriageRow(row))
	return nil
}
