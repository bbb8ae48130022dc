package web

import (
	"fmt"
	"net/http"
	"slices"
	"strconv"
	"strings"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
	"cohortdesk/db"
	"cohortdesk/views"
)

// triageGroupLimit bounds the rows shown per group; the rest are a link away
// on the case list, so the page stays quick on a busy morning.
const triageGroupLimit = 25

// triageGroups are the page's groups, in the order of followup.Bucket. Each
// counts cases; the tile says so.
var triageGroups = []struct {
	bucket followup.Bucket
	key    string
	title  string
	tile   string // the count's label, with its unit
	hint   string
	more   string
}{
	{followup.BucketOverdue, "overdue", "Overdue", "cases overdue", "The next action's deadline has passed; the most overdue first.", "/cases?overdue=on"},
	{followup.BucketDueToday, "today", "Due today", "cases due today", "Deadlines that fall at the end of today in the study's time zone.", "/cases"},
	{followup.BucketNewUnowned, "new", "New flags nobody has taken on", "new flags (cases) nobody has taken on", "Open cases without an owner, oldest flag first.", "/cases?state=open&owner=none"},
	{followup.BucketAwaitingOverRead, "overread", "Cases waiting for an over-read", "cases waiting for an over-read",
		"Cases holding a recording back from the participant that no clinician has read yet, oldest recording first.", "/cases?state=recording_received"},
	{followup.BucketMine, "mine", "Your cases, coming due", "of your cases coming due",
		"Cases you have taken on with nothing urgent yet, earliest deadline first: they stay in sight after you act on them.", "/cases?owner=me"},
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
	// Acting from the row (issue 19, finding 4): taking a colleague's case
	// asks first; the contact details are a click away for the roles that
	// see them, shown on request and audited; a clinician opens the
	// recording waiting for them.
	if v.CanTake && row.OwnerID != 0 {
		v.TakeConfirm = fmt.Sprintf("%s has taken this case on. Take it over from them?", row.Owner)
	}
	if followup.WorksCases(u.Role) && u.Role.SeesPHI() {
		v.ContactHref = fmt.Sprintf("/cases/%d/contact", row.ID)
	}
	if offered(followup.StepOverRead) && row.FirstUnread != 0 {
		v.ReadHref = fmt.Sprintf("/recordings/%d", row.FirstUnread)
	}
	return v
}

// triageBoard builds the groups and counts of the signed-in person's triage.
// The row of case acted (0: none) says what happened (done) or why nothing
// did (refusal); when that case has left every group shown, the board says
// where it went.
func (s *Server) triageBoard(r *http.Request, acted int64, done, refusal string) (views.TriageModel, error) {
	ctx := r.Context()
	u, _ := userFrom(ctx)
	t, err := s.store.Triage(ctx, triageGroupLimit, u.ID)
	if err != nil {
		return views.TriageModel{}, err
	}
	us, err := s.store.CaseWorkers(ctx)
	if err != nil {
		return views.TriageModel{}, err
	}
	workers := workerOptions(us, false)
	m := views.TriageModel{Page: s.page(r, "Triage", "triage"), OrderRule: followup.OrderRule, UnreadRecordings: t.UnreadRecordings,
		Scheduled: t.Counts[followup.BucketOther],
		AsOf:      fmt.Sprintf("As of %s, %s (%s).", dayLabel(t.Settings.Calendar().DateOf(t.Now)), cohort.ClockLabel(t.Now, t.Settings.Location()), t.Settings.Location())}
	byBucket := map[followup.Bucket][]db.TriageRow{}
	for _, row := range t.Rows {
		byBucket[row.Bucket] = append(byBucket[row.Bucket], row)
	}
	shown := false
	for _, g := range triageGroups {
		tg := views.TriageGroup{Key: g.key, Title: g.title, Tile: g.tile, Hint: g.hint, Count: t.Counts[g.bucket]}
		for _, row := range byBucket[g.bucket] {
			v := s.triageRow(r, t, row, workers)
			if row.ID == acted {
				shown = true
				v.Done, v.Error = done, refusal
				if done != "" {
					v.Done += " Now: " + v.Group + "."
				}
			}
			tg.Rows = append(tg.Rows, v)
		}
		if tg.Count > len(tg.Rows) {
			tg.More = g.more
		}
		m.Groups = append(m.Groups, tg)
	}
	if acted != 0 && !shown {
		// The case left the groups shown: say what happened and where it is.
		one, err := s.store.TriageCase(ctx, acted, u.ID)
		if err != nil {
			return m, err
		}
		row := one.Rows[0]
		where := "it is " + row.Bucket.Label() + ", on the case list"
		if row.State.Terminal() {
			where = "it is closed"
		}
		m.Notice = fmt.Sprintf("%s: %s", row.StudyID, done)
		if refusal != "" {
			m.Notice, m.NoticeRefused = fmt.Sprintf("%s: %s", row.StudyID, refusal), true
		}
		m.Notice += " Now " + where + "."
		m.NoticeHref = fmt.Sprintf("/cases/%d", row.ID)
	}
	// The rows' one-step messages and the morning-summary choice (outreach).
	return m, s.triageOutreach(r, &m)
}

// triage is the coordinators' morning list: the urgent groups in the order of
// followup.Urgency, the person's own cases coming due, with counts and
// one-step actions.
func (s *Server) triage(w http.ResponseWriter, r *http.Request) error {
	m, err := s.triageBoard(r, 0, "", "")
	if err != nil {
		return err
	}
	m.Page.Flash = doneMessages[r.URL.Query().Get("done")]
	return s.ok(w, r, views.Triage(m))
}

// triageAnswer answers an htmx action from the triage page with the board
// as it now is: the case's row in its new group saying what happened (or
// why nothing did), every group and count up to date. A refusal keeps its
// status (409, 422); the page script lets htmx swap those in.
func (s *Server) triageAnswer(w http.ResponseWriter, r *http.Request, id int64, actionErr error, done string) error {
	if _, err := s.store.Case(r.Context(), id); err != nil {
		return err
	}
	status, refusal, did := http.StatusOK, "", ""
	if actionErr != nil {
		f, ok := refused(r, actionErr, nil)
		if !ok {
			return actionErr
		}
		status, refusal = f.Status, f.Message
	} else {
		did = doneMessages[done]
	}
	m, err := s.triageBoard(r, id, did, refusal)
	if err != nil {
		return err
	}
	s.render(w, r, status, views.TriageBoard(m))
	return nil
}

// caseContact shows the participant's contact details for one case: into its
// triage row for htmx, else on a page of their own. Each view is audited
// (db.Store.Identity).
func (s *Server) caseContact(w http.ResponseWriter, r *http.Request) error {
	id, err := idParam(r)
	if err != nil {
		return err
	}
	c, err := s.store.Case(r.Context(), id)
	if err != nil {
		return err
	}
	ident, err := s.store.Identity(r.Context(), s.actor(r), c.ParticipantID, "triage row")
	if err != nil {
		return err
	}
	v := views.ContactView{CaseID: c.ID, StudyID: c.StudyID, Name: ident.FullName(), Phone: ident.Phone, Email: ident.Email,
		Address: strings.Trim(strings.TrimSpace(ident.Street+", "+ident.City+" "+ident.ZIP), ", ")}
	if r.Header.Get("HX-Request") == "true" {
		s.render(w, r, http.StatusOK, views.TriageContact(v))
		return nil
	}
	return s.ok(w, r, views.ContactPage(views.ContactPageModel{Page: s.page(r, "Contact details "+c.StudyID, "triage"), Contact: v}))
}
