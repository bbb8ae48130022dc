package web

import (
	"context"
	"encoding/csv"
	"fmt"
	"net/http"
	"net/url"
	"strconv"
	"strings"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/deid"
	"cohortdesk/cohort/enrolment"
	"cohortdesk/cohort/screen"
	"cohortdesk/db"
	"cohortdesk/views"
	"cohortdesk/views/components"
)

type participantStore interface {
	Sites(ctx context.Context) ([]db.Site, error)
	Participants(ctx context.Context, f db.ParticipantFilter) (db.ParticipantPage, error)
	Participant(ctx context.Context, id int64) (db.Participant, error)
	Identity(ctx context.Context, a cohort.Actor, participantID int64, purpose string) (db.Identity, error)
	Enrol(ctx context.Context, a cohort.Actor, in db.ParticipantInput) (db.Participant, error)
	UpdateParticipant(ctx context.Context, a cohort.Actor, id int64, in db.ParticipantInput) (db.Participant, error)
	Withdraw(ctx context.Context, a cohort.Actor, id int64, on cohort.Date, reason string, version int) (db.Participant, error)
	Timeline(ctx context.Context, p db.Participant) ([]db.WeekLine, error)
	Notes(ctx context.Context, participantID int64) ([]db.Note, error)
	AddNote(ctx context.Context, a cohort.Actor, participantID int64, body string) error
	Audit(ctx context.Context, a cohort.Actor, action, objType, objID string, old, new any) error
}

// ageBand of a participant today, from the age at enrolment (no PHI
// needed), in the one set of age bands (deid.AgeBand), the referral
// summary's.
func ageBand(p db.Participant, now time.Time) string {
	if p.AgeAtEnrolment == nil {
		return "not recorded"
	}
	return deid.AgeBand(deid.AgeSince(*p.AgeAtEnrolment, p.EnrolledOn, cohort.DateOf(now.In(p.Location()))).Years)
}

// statusDay is what a participant's status is read against: the study's
// weeks of follow-up (0: open-ended) and today in the study's time zone,
// as the store counts them (cohort.StatusOf).
type statusDay struct {
	weeks int
	today cohort.Date
}

func (s *Server) statusDay(ctx context.Context) (statusDay, error) {
	st, err := s.store.StudySettings(ctx)
	if err != nil {
		return statusDay{}, err
	}
	return statusDay{weeks: st.FollowUpWeeks, today: cohort.DateOf(s.now().In(st.Location()))}, nil
}

// status is the participant's status (cohort.StatusOf) with its badge tone.
func (d statusDay) status(p db.Participant) (cohort.ParticipantStatus, components.Tone) {
	st := cohort.StatusOf(p.EnrolledOn, p.WithdrawnOn, d.weeks, d.today)
	switch st {
	case cohort.StatusWithdrawn:
		return st, components.Neutral
	case cohort.StatusCompleted:
		return st, components.Info
	}
	return st, components.OK
}

// participantFilter reads the filter from the query string.
func participantFilter(q url.Values, seesPHI bool) (db.ParticipantFilter, views.ParticipantFilterForm) {
	form := views.ParticipantFilterForm{Search: q.Get("q"), SiteID: q.Get("site"), Status: q.Get("status"),
		PositiveWeeks: q.Get("positive"), OpenCase: q.Get("open_case") == "on", Sort: q.Get("sort"), Desc: q.Get("desc") == "on"}
	f := db.ParticipantFilter{Search: form.Search, OpenCase: form.OpenCase, Sort: form.Sort,
		Desc: form.Desc, After: q.Get("after"), WithNames: seesPHI}
	if st := cohort.ParticipantStatus(form.Status); st.Valid() {
		f.Status = st
	}
	for _, st := range cohort.ParticipantStatuses() {
		form.Statuses = append(form.Statuses, views.Option{Value: string(st), Label: st.Label()})
	}
	f.SiteID, _ = strconv.Atoi(form.SiteID)
	f.PositiveWeeks, _ = strconv.Atoi(form.PositiveWeeks)
	return f, form
}

func (s *Server) siteOptions(ctx context.Context) ([]views.Option, []db.Site, error) {
	sites, err := s.store.Sites(ctx)
	if err != nil {
		return nil, nil, err
	}
	opts := make([]views.Option, len(sites))
	for i, st := range sites {
		opts[i] = views.Option{Value: strconv.Itoa(st.ID), Label: st.Code + " · " + st.Name}
	}
	return opts, sites, nil
}

func (s *Server) participantsList(w http.ResponseWriter, r *http.Request) error {
	ctx := r.Context()
	seesPHI := role(r).SeesPHI()
	f, form := participantFilter(r.URL.Query(), seesPHI)
	page, err := s.store.Participants(ctx, f)
	if err != nil {
		return err
	}
	sites, _, err := s.siteOptions(ctx)
	if err != nil {
		return err
	}
	m := views.ParticipantsModel{Page: s.page(r, "Participants", "participants"), Filter: form, Sites: sites, ShowNames: seesPHI,
		CanEnrol: coordWork.allows(role(r)), Total: page.Total}
	for _, st := range cohort.ParticipantStatuses() {
		m.ByStatus = append(m.ByStatus, views.Tile{Key: string(st), Label: "participants " + st.Label(), Value: page.Status[st]})
	}
	now := s.now()
	day, err := s.statusDay(ctx)
	if err != nil {
		return err
	}
	ids := make([]int64, 0, len(page.Rows))
	for _, p := range page.Rows {
		st, tone := day.status(p.Participant)
		row := views.ParticipantListRow{ID: p.ID, StudyID: p.StudyID, Name: p.Name, Site: p.SiteCode, Sex: p.Sex.Label(),
			AgeBand: ageBand(p.Participant, now), EnrolledOn: p.EnrolledOn.Label(), Status: st.Label(), StatusTone: tone, OpenCases: p.OpenCases}
		if p.LastPositive != nil {
			row.LastPositive = "week " + strconv.Itoa(*p.LastPositive)
		}
		m.Rows = append(m.Rows, row)
		ids = append(ids, p.ID)
	}
	if seesPHI && len(ids) > 0 {
		// Names on a list are a view of PHI: record whose.
		if err := s.store.Audit(ctx, s.actor(r), "participant.list_phi", "participant_list", "", nil, map[string]any{"participant_ids": ids}); err != nil {
			return err
		}
	}
	q := r.URL.Query()
	m.Sort = map[string]components.SortHead{}
	for _, c := range []struct{ key, label string }{{"study_id", "Study ID"}, {"site", "Site"}, {"enrolled", "Enrolled"}} {
		m.Sort[c.key] = sortHead("/participants", q, c.label, c.key, f.Sort, "study_id", f.Desc)
	}
	if page.Next != "" {
		q.Set("after", page.Next)
		m.Next = "/participants?" + q.Encode()
	}
	if f.After != "" {
		q.Del("after")
		m.First = "/participants?" + q.Encode()
	}
	q.Del("after")
	m.CSV = "/participants.csv?" + q.Encode()
	return s.ok(w, r, views.Participants(m))
}

// participantsCSV streams the whole filtered list. Names and contact details
// only for roles that see PHI; the download is audited.
func (s *Server) participantsCSV(w http.ResponseWriter, r *http.Request) error {
	ctx := r.Context()
	seesPHI := role(r).SeesPHI()
	f, _ := participantFilter(r.URL.Query(), seesPHI)
	f.After, f.Limit = "", 500
	if err := s.store.Audit(ctx, s.actor(r), "participant.export_list", "participant_list", "",
		nil, map[string]any{"filter": r.URL.RawQuery, "with_phi": seesPHI}); err != nil {
		return err
	}
	w.Header().Set("Content-Type", "text/csv; charset=utf-8")
	w.Header().Set("Content-Disposition", fmt.Sprintf(`attachment; filename="participants-%s.csv"`, s.now().UTC().Format("20060102")))
	cw := csv.NewWriter(w)
	head := []string{"study_id", "site", "sex", "age_band", "enrolled_on", "status", "withdrawn_on", "last_positive_week", "open_cases"}
	if seesPHI {
		head = append(head, "name")
	}
	_ = cw.Write(head)
	now := s.now()
	day, err := s.statusDay(ctx)
	if err != nil {
		return err
	}
	for {
		page, err := s.store.Participants(ctx, f)
		if err != nil {
			return err
		}
		for _, p := range page.Rows {
			st, _ := day.status(p.Participant)
			withdrawn, last := "", ""
			if p.WithdrawnOn != nil {
				withdrawn = p.WithdrawnOn.String()
			}
			if p.LastPositive != nil {
				last = strconv.Itoa(*p.LastPositive)
			}
			rec := []string{csvSafe(p.StudyID), p.SiteCode, p.Sex.Label(), ageBand(p.Participant, now), p.EnrolledOn.String(), string(st), withdrawn, last, strconv.Itoa(p.OpenCases)}
			if seesPHI {
				rec = append(rec, csvSafe(p.Name))
			}
			_ = cw.Write(rec)
		}
		cw.Flush()
		if page.Next == "" {
			return cw.Error()
		}
		f.After = page.Next
	}
}

func (s *Server) participantParam(r *http.Request) (db.Participant, error) {
	id, err := idParam(r)
	if err != nil {
		return db.Participant{}, err
	}
	return s.store.Participant(r.Context(), id)
}

func yesNo(b *bool) string {
	switch {
	case b == nil:
		return "not answered"
	case *b:
		return "yes"
	}
	return "no"
}

func verdictTone(v screen.Verdict) components.Tone {
	switch v {
	case screen.Positive:
		return components.Alarm
	case screen.Negative:
		return components.OK
	}
	return components.Neutral
}

func (s *Server) participantShow(w http.ResponseWriter, r *http.Request) error {
	ctx := r.Context()
	p, err := s.participantParam(r)
	if err != nil {
		return err
	}
	day, err := s.statusDay(ctx)
	if err != nil {
		return err
	}
	st, tone := day.status(p)
	m := views.ParticipantModel{Page: s.page(r, p.StudyID, "participants"), ID: p.ID, StudyID: p.StudyID, Status: st.Label(), StatusTone: tone,
		CanEdit: coordWork.allows(role(r)), CanNote: caseWork.allows(role(r)), Withdrawn: p.WithdrawnOn != nil}
	m.Facts = []views.Fact{
		{Label: "Site", Value: p.SiteCode},
		{Label: "Sex", Value: p.Sex.Label()},
		{Label: "Age band", Value: ageBand(p, s.now())},
		{Label: "Enrolled", Value: p.EnrolledOn.Label()},
		{Label: "Time zone", Value: p.TimeZone},
		{Label: "Consent version", Value: p.ConsentVersion},
		{Label: "Watch", Value: p.WatchModel},
		{Label: "Beat intervals", Value: map[bool]string{true: "supplied by the watch", false: "not supplied"}[p.RRCapable]},
	}
	if p.WithdrawnOn != nil {
		m.Facts = append(m.Facts, views.Fact{Label: "Withdrawn", Value: p.WithdrawnOn.Label() + " (" + p.WithdrawalReason + ")"})
	}
	m.Risk = []views.Fact{
		{Label: "High blood pressure", Value: yesNo(p.Risk.Hypertension)},
		{Label: "Diabetes", Value: yesNo(p.Risk.Diabetes)},
		{Label: "Heart failure", Value: yesNo(p.Risk.HeartFailure)},
		{Label: "Prior stroke, TIA or thromboembolism", Value: yesNo(p.Risk.PriorStroke)},
		{Label: "Vascular disease", Value: yesNo(p.Risk.VascularDisease)},
	}
	if role(r).SeesPHI() {
		id, err := s.store.Identity(ctx, s.actor(r), p.ID, "participant page")
		if err != nil {
			return err
		}
		birth := ""
		if id.BirthDate != nil {
			birth = id.BirthDate.Label()
		}
		m.Identity = []views.Fact{{Label: "Name", Value: id.FullName()}, {Label: "Birth date", Value: birth}, {Label: "Phone", Value: id.Phone},
			{Label: "E-mail", Value: id.Email}, {Label: "Address", Value: strings.TrimSpace(id.Street + ", " + id.City + " " + id.ZIP)},
			{Label: "Watch serial", Value: id.DeviceSerial}}
	}
	lines, err := s.store.Timeline(ctx, p)
	if err != nil {
		return err
	}
	chartWeek := -1
	if wk, err := strconv.Atoi(r.URL.Query().Get("week")); err == nil {
		chartWeek = wk
	}
	if chartWeek < 0 {
		chartWeek = defaultChartWeek(lines)
	}
	m.ChartWeek = chartWeek
	loc := p.Location()
	for _, l := range lines {
		start, end := cohort.WeekBounds(p.EnrolledOn, loc, l.Week)
		row := views.TimelineRow{Week: l.Week, Dates: cohort.DateRangeLabel(cohort.DateOf(start), cohort.DateOf(end.AddDate(0, 0, -1))), Readings: l.Readings,
			Verdict: l.Verdict.Label(), Tone: verdictTone(l.Verdict), Reason: l.Reason, ECG: l.ECG, Selected: l.Week == chartWeek,
			Chart: fmt.Sprintf("/participants/%d?week=%d", p.ID, l.Week)}
		if l.WearHours > 0 {
			row.WearHours = strconv.FormatFloat(l.WearHours, 'f', 1, 64)
		}
		if l.CaseID != 0 {
			row.CaseHref, row.CaseState = fmt.Sprintf("/cases/%d", l.CaseID), l.CaseState.Label()
		}
		m.Timeline = append(m.Timeline, row)
	}
	if err := s.participantCharts(r, p, lines, &m); err != nil {
		return err
	}
	notes, err := s.store.Notes(ctx, p.ID)
	if err != nil {
		return err
	}
	if r.URL.Query().Get("done") == "note" {
		m.NoteSaved = "Note saved."
	}
	studyLoc := s.studyZone(ctx)
	for _, n := range notes {
		m.Notes = append(m.Notes, views.NoteView{Body: n.Body, Actor: n.Actor, At: when(n.At, studyLoc)})
	}
	return s.ok(w, r, views.ParticipantPage(m))
}

// defaultChartWeek is the latest screen-positive week, else the latest week
// with readings.
func defaultChartWeek(lines []db.WeekLine) int {
	best := -1
	for _, l := range lines {
		if l.Verdict == screen.Positive {
			best = l.Week
		}
	}
	if best >= 0 {
		return best
	}
	for _, l := range lines {
		if l.Readings > 0 {
			best = l.Week
		}
	}
	if best < 0 {
		return 0
	}
	return best
}

// participantInput reads the enrol and edit form. What cannot be read is
// refused together with what the enrolment rules say about the rest.
func (s *Server) participantInput(r *http.Request) (db.ParticipantInput, error) {
	f := readForm(r.PostForm)
	in := db.ParticipantInput{StudyID: f.text("study_id"), Sex: cohort.Sex(f.text("sex")), TimeZone: f.text("time_zone"),
		EnrolledOn: f.date("enrolled_on", "enrolment date"), ConsentVersion: f.text("consent_version"), WatchModel: f.text("watch_model"),
		RRCapable: f.ticked("rr_capable"), Version: f.version(),
		Identity: db.Identity{GivenName: f.raw("given_name"), FamilyName: f.raw("family_name"), Phone: f.raw("phone"), Email: f.raw("email"),
			Street: f.raw("street"), City: f.raw("city"), ZIP: f.raw("zip"), DeviceSerial: f.raw("device_serial"),
			BirthDate: f.optionalDate("birth_date", "birth date")}}
	in.SiteID, _ = strconv.Atoi(f.text("site_id")) // 0, no site, is refused by the rules
	answer := func(k string) *bool {
		switch f.text(k) {
		case "yes":
			t := true
			return &t
		case "no":
			b := false
			return &b
		}
		return nil
	}
	in.Risk = db.Risk{Hypertension: answer("hypertension"), Diabetes: answer("diabetes"), HeartFailure: answer("heart_failure"),
		PriorStroke: answer("prior_stroke"), VascularDisease: answer("vascular_disease")}
	return in, f.check(func() error { return in.Check(cohort.DateOf(s.now())) })
}

// participantForm shows the enrolment or edit form, with the sites to
// choose from, at status (200, or a refusal's).
func (s *Server) participantForm(w http.ResponseWriter, r *http.Request, status int, m views.ParticipantFormModel) error {
	sites, _, err := s.siteOptions(r.Context())
	if err != nil {
		return err
	}
	m.Sites, m.ShowPHI = sites, true
	s.render(w, r, status, views.ParticipantForm(m))
	return nil
}

// enrolForm is the enrolment form's model around the values shown.
func (s *Server) enrolForm(r *http.Request, vals, errs map[string]string) views.ParticipantFormModel {
	return views.ParticipantFormModel{Page: s.page(r, "Enrol a participant", "participants"), Action: "/participants",
		Heading: "Enrol a participant", Values: vals, Errors: errs}
}

// editForm is the edit form's model of p around the values shown.
func (s *Server) editForm(r *http.Request, p db.Participant, version int, vals, errs map[string]string) views.ParticipantFormModel {
	return views.ParticipantFormModel{Page: s.page(r, "Edit "+p.StudyID, "participants"), Action: fmt.Sprintf("/participants/%d/edit", p.ID),
		Heading: "Edit " + p.StudyID, Values: vals, Errors: errs, Version: version}
}

func (s *Server) participantNew(w http.ResponseWriter, r *http.Request) error {
	vals := map[string]string{"enrolled_on": s.now().Format("2006-01-02"), "sex": string(cohort.Unknown)}
	return s.participantForm(w, r, http.StatusOK, s.enrolForm(r, vals, nil))
}

// participantClash words a clash of an enrolment with a stored record.
var participantClash = map[string]string{"form": "this clashes with a stored record (for example the study ID is taken)", "study_id": "already in use"}

func (s *Server) participantCreate(w http.ResponseWriter, r *http.Request) error {
	if err := r.ParseForm(); err != nil {
		return err
	}
	in, err := s.participantInput(r)
	var p db.Participant
	if err == nil {
		p, err = s.store.Enrol(r.Context(), s.actor(r), in)
	}
	if err != nil {
		f, ok := refused(r, err, participantClash)
		if !ok {
			return err
		}
		return s.participantForm(w, r, f.Status, s.enrolForm(r, f.Values, f.Fields))
	}
	http.Redirect(w, r, fmt.Sprintf("/participants/%d", p.ID), http.StatusSeeOther)
	return nil
}

func (s *Server) participantEdit(w http.ResponseWriter, r *http.Request) error {
	p, err := s.participantParam(r)
	if err != nil {
		return err
	}
	id, err := s.store.Identity(r.Context(), s.actor(r), p.ID, "edit form")
	if err != nil {
		return err
	}
	ans := func(b *bool) string {
		if b == nil {
			return ""
		}
		return map[bool]string{true: "yes", false: "no"}[*b]
	}
	vals := map[string]string{"study_id": p.StudyID, "site_id": strconv.Itoa(p.SiteID), "sex": string(p.Sex), "enrolled_on": p.EnrolledOn.String(),
		"time_zone": p.TimeZone, "consent_version": p.ConsentVersion, "watch_model": p.WatchModel,
		"hypertension": ans(p.Risk.Hypertension), "diabetes": ans(p.Risk.Diabetes), "heart_failure": ans(p.Risk.HeartFailure),
		"prior_stroke": ans(p.Risk.PriorStroke), "vascular_disease": ans(p.Risk.VascularDisease),
		"given_name": id.GivenName, "family_name": id.FamilyName, "phone": id.Phone, "email": id.Email, "street": id.Street, "city": id.City,
		"zip": id.ZIP, "device_serial": id.DeviceSerial}
	if p.RRCapable {
		vals["rr_capable"] = "on"
	}
	if id.BirthDate != nil {
		vals["birth_date"] = id.BirthDate.String()
	}
	return s.participantForm(w, r, http.StatusOK, s.editForm(r, p, p.Version, vals, nil))
}

func (s *Server) participantUpdate(w http.ResponseWriter, r *http.Request) error {
	p, err := s.participantParam(r)
	if err != nil {
		return err
	}
	if err := r.ParseForm(); err != nil {
		return err
	}
	in, err := s.participantInput(r)
	if err == nil {
		_, err = s.store.UpdateParticipant(r.Context(), s.actor(r), p.ID, in)
	}
	if err != nil {
		f, ok := refused(r, err, participantClash)
		if !ok {
			return err
		}
		return s.participantForm(w, r, f.Status, s.editForm(r, p, in.Version, f.Values, f.Fields))
	}
	http.Redirect(w, r, fmt.Sprintf("/participants/%d", p.ID), http.StatusSeeOther)
	return nil
}

func (s *Server) participantWithdrawForm(w http.ResponseWriter, r *http.Request) error {
	p, err := s.participantParam(r)
	if err != nil {
		return err
	}
	return s.ok(w, r, views.Withdraw(views.WithdrawModel{Page: s.page(r, "Withdraw "+p.StudyID, "participants"), ID: p.ID, StudyID: p.StudyID,
		Values: map[string]string{"withdrawn_on": s.now().Format("2006-01-02")}, Version: p.Version}))
}

func (s *Server) participantWithdraw(w http.ResponseWriter, r *http.Request) error {
	p, err := s.participantParam(r)
	if err != nil {
		return err
	}
	if err := r.ParseForm(); err != nil {
		return err
	}
	f := readForm(r.PostForm)
	wd := enrolment.Withdrawal{On: f.date("withdrawn_on", "withdrawal date"), Reason: f.raw("reason")}
	err = f.check(func() error { return wd.Check(cohort.DateOf(s.now())) })
	if err == nil {
		_, err = s.store.Withdraw(r.Context(), s.actor(r), p.ID, wd.On, wd.Reason, f.version())
	}
	if err != nil {
		no, ok := refused(r, err, nil)
		if !ok {
			return err
		}
		s.render(w, r, no.Status, views.Withdraw(views.WithdrawModel{Page: s.page(r, "Withdraw "+p.StudyID, "participants"), ID: p.ID, StudyID: p.StudyID,
			Values: no.Values, Errors: no.Fields, Version: f.version()}))
		return nil
	}
	if err := s.afterWithdrawal(r, p.ID); err != nil {
		return err
	}
	http.Redirect(w, r, fmt.Sprintf("/participants/%d", p.ID), http.StatusSeeOther)
	return nil
}

func (s *Server) participantNote(w http.ResponseWriter, r *http.Request) error {
	p, err := s.participantParam(r)
	if err != nil {
		return err
	}
	if err := r.ParseForm(); err != nil {
		return err
	}
	if err := s.store.AddNote(r.Context(), s.actor(r), p.ID, r.PostForm.Get("body")); err != nil {
		return err
	}
	http.Redirect(w, r, fmt.Sprintf("/participants/%d?done=note#notes", p.ID), http.StatusSeeOther)
	return nil
}
