package web

import (
	"context"
	"fmt"
	"net/http"
	"slices"
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
	FirstEnrolment(ctx context.Context) (cohort.Date, error)
	ParticipantIDs(ctx context.Context, f db.ParticipantFilter) ([]int64, error)
	Participant(ctx context.Context, id int64) (db.Participant, error)
	Identity(ctx context.Context, a cohort.Actor, participantID int64, purpose string) (db.Identity, error)
	Enrol(ctx context.Context, a cohort.Actor, in db.ParticipantInput) (db.Participant, error)
	UpdateParticipant(ctx context.Context, a cohort.Actor, id int64, in db.ParticipantInput) (db.Participant, error)
	Withdraw(ctx context.Context, a cohort.Actor, id int64, on cohort.Date, reason string, version int) (db.Participant, error)
	ParticipantSheet(ctx context.Context, p db.Participant) (db.ParticipantSheet, error)
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

// firstEnrolment is the study's first enrolment day when the request's role
// sees enrolments as recruitment weeks counted from it; otherwise nothing is
// read.
func (s *Server) firstEnrolment(ctx context.Context, d disclosure) (cohort.Date, error) {
	if d.dates {
		return cohort.Date{}, nil
	}
	return s.store.FirstEnrolment(ctx)
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
	q := readQuery(r.URL.Query())
	chartWeek, chosen := q.number("week", 0, maxStudyWeek, "study week")
	if err := q.err(); err != nil {
		return err
	}
	p, err := s.participantParam(r)
	if err != nil {
		return err
	}
	d := disclosureOf(r)
	first, err := s.firstEnrolment(ctx, d)
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
		{Label: "Enrolled", Value: d.enrolment(first, p.EnrolledOn)},
		{Label: "Consent version", Value: p.ConsentVersion},
		{Label: "Watch", Value: p.WatchModel},
		{Label: "Beat intervals", Value: map[bool]string{true: "supplied by the watch", false: "not supplied"}[p.RRCapable]},
	}
	if role(r).SeesPHI() {
		// A time zone can name an area smaller than a state (a county's
		// zone): geography, shown with the other identifying details' rule.
		m.Facts = slices.Insert(m.Facts, 4, views.Fact{Label: "Time zone", Value: p.TimeZone})
	}
	if p.WithdrawnOn != nil {
		withdrawn := d.day(p.EnrolledOn, *p.WithdrawnOn)
		if reason := d.text(p.WithdrawalReason); reason != "" {
			withdrawn += " (" + reason + ")"
		}
		m.Facts = append(m.Facts, views.Fact{Label: "Withdrawn", Value: withdrawn})
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
	sheet, err := s.store.ParticipantSheet(ctx, p)
	if err != nil {
		return err
	}
	lines := sheet.Lines
	if !chosen {
		chartWeek = defaultChartWeek(lines)
	}
	m.ChartWeek = chartWeek
	loc := p.Location()
	for _, l := range lines {
		row := views.TimelineRow{Week: l.Week, Dates: d.weekSpan(p.EnrolledOn, loc, l.Week), Readings: l.Readings,
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
	if err := s.participantCharts(r, p, sheet, &m); err != nil {
		return err
	}
	m.NotesHidden = !d.dates
	if d.dates {
		if r.URL.Query().Get("done") == "note" {
			m.NoteSaved = "Note saved."
		}
		studyLoc := s.studyZone(ctx)
		for _, n := range sheet.Notes {
			m.Notes = append(m.Notes, views.NoteView{Body: n.Body, Actor: n.Actor, At: when(n.At, studyLoc)})
		}
	}
	return s.ok(w, r, views.ParticipantPage(m))
}

// maxStudyWeek bounds the study week a page may ask for: twenty years.
const maxStudyWeek = 1043

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
