package web

// The participant list, its filter and its CSV download.

import (
	"encoding/csv"
	"fmt"
	"net/http"
	"net/url"
	"slices"
	"strconv"

	"cohortdesk/cohort"
	"cohortdesk/cohort/deid"
	"cohortdesk/db"
	"cohortdesk/views"
	"cohortdesk/views/components"
)

// participantFilter reads the filter from the query string, strictly (a
// value the list cannot use is a queryError): the sites are the study's.
func participantFilter(v url.Values, seesPHI bool, sites []db.Site) (db.ParticipantFilter, views.ParticipantFilterForm, error) {
	q := readQuery(v)
	statuses := make([]string, 0, 3)
	for _, st := range cohort.ParticipantStatuses() {
		statuses = append(statuses, string(st))
	}
	form := views.ParticipantFilterForm{Search: q.text("q"), Status: q.oneOf("status", statuses...),
		OpenCase: q.flag("open_case"), Sort: q.oneOf("sort", "study_id", "enrolled", "site"), Desc: q.flag("desc")}
	for _, st := range cohort.ParticipantStatuses() {
		form.Statuses = append(form.Statuses, views.Option{Value: string(st), Label: st.Label()})
	}
	f := db.ParticipantFilter{Search: form.Search, Status: cohort.ParticipantStatus(form.Status), OpenCase: form.OpenCase, Sort: form.Sort,
		Desc: form.Desc, After: q.get("after"), WithNames: seesPHI}
	f.SiteID = siteParam(q, "site", sites)
	if f.SiteID > 0 {
		form.SiteID = strconv.Itoa(f.SiteID)
	}
	if n, ok := q.number("positive", 1, db.MaxPositiveWeeks, "weeks"); ok {
		f.PositiveWeeks, form.PositiveWeeks = n, strconv.Itoa(n)
	}
	if err := q.check(f.Check()); err != nil {
		return f, form, err
	}
	return f, form, q.err()
}

// siteParam reads a site choice: one of the study's sites, 0 when none is
// chosen.
func siteParam(q *query, name string, sites []db.Site) int {
	v := q.get(name)
	if v == "" {
		return 0
	}
	id, err := strconv.Atoi(v)
	for _, st := range sites {
		if err == nil && st.ID == id {
			return id
		}
	}
	q.refuse(name, "choose a site from the list")
	return 0
}

func (s *Server) participantsList(w http.ResponseWriter, r *http.Request) error {
	ctx := r.Context()
	seesPHI := role(r).SeesPHI()
	sites, siteList, err := s.siteOptions(ctx)
	if err != nil {
		return err
	}
	f, form, err := participantFilter(r.URL.Query(), seesPHI, siteList)
	if err != nil {
		return err
	}
	page, err := s.store.Participants(ctx, f)
	if err != nil {
		return err
	}
	m := views.ParticipantsModel{Page: s.page(r, "Participants", "participants"), Filter: form, Sites: sites, ShowNames: seesPHI,
		CanEnrol: coordWork.allows(role(r)), Total: page.Total}
	for _, st := range cohort.ParticipantStatuses() {
		m.ByStatus = append(m.ByStatus, views.Tile{Key: string(st), Label: cohort.Noun(page.Status[st], "participant") + " " + st.Label(), Value: page.Status[st]})
	}
	d := disclosureOf(r)
	first, err := s.firstEnrolment(ctx, d)
	if err != nil {
		return err
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
			AgeBand: ageBand(p.Participant, now), EnrolledOn: d.enrolment(first, p.EnrolledOn), Status: st.Label(), StatusTone: tone, OpenCases: p.OpenCases}
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
// only for roles that see PHI. The download is audited first, with the ids
// of the participants it holds (as runs of consecutive ids); the file then
// holds exactly those of them that still match when their page is read.
func (s *Server) participantsCSV(w http.ResponseWriter, r *http.Request) error {
	ctx := r.Context()
	seesPHI := role(r).SeesPHI()
	sites, err := s.store.Sites(ctx)
	if err != nil {
		return err
	}
	f, _, err := participantFilter(r.URL.Query(), seesPHI, sites)
	if err != nil {
		return err
	}
	f.After, f.Limit = "", 500
	ids, err := s.store.ParticipantIDs(ctx, f)
	if err != nil {
		return err
	}
	if err := s.store.Audit(ctx, s.actor(r), "participant.export_list", "participant_list", "",
		nil, map[string]any{"filter": r.URL.RawQuery, "with_phi": seesPHI, "count": len(ids), "participant_ids": idRuns(ids)}); err != nil {
		return err
	}
	d := disclosureOf(r)
	first, err := s.firstEnrolment(ctx, d)
	if err != nil {
		return err
	}
	w.Header().Set("Content-Type", "text/csv; charset=utf-8")
	w.Header().Set("Content-Disposition", fmt.Sprintf(`attachment; filename="participants-%s.csv"`, s.now().UTC().Format("20060102")))
	cw := csv.NewWriter(w)
	enrolledCol, withdrawnCol := "enrolled_on", "withdrawn_on"
	if !d.dates {
		enrolledCol, withdrawnCol = "recruitment_week", "withdrawn_study_day" // study time, no dates
	}
	head := []string{"study_id", "site", "sex", "age_band", enrolledCol, "status", withdrawnCol, "last_positive_week", "open_cases"}
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
			if _, audited := slices.BinarySearch(ids, p.ID); !audited {
				continue // enrolled since the audit event was written: not part of this download
			}
			st, _ := day.status(p.Participant)
			enrolled, withdrawn, last := p.EnrolledOn.String(), "", ""
			if !d.dates {
				enrolled = strconv.Itoa(deid.RecruitmentWeek(first, p.EnrolledOn))
			}
			if p.WithdrawnOn != nil {
				withdrawn = p.WithdrawnOn.String()
				if !d.dates {
					withdrawn = strconv.Itoa(deid.StudyTimeOf(p.EnrolledOn, *p.WithdrawnOn).Day)
				}
			}
			if p.LastPositive != nil {
				last = strconv.Itoa(*p.LastPositive)
			}
			rec := []string{csvSafe(p.StudyID), p.SiteCode, p.Sex.Label(), ageBand(p.Participant, now), enrolled, string(st), withdrawn, last, strconv.Itoa(p.OpenCases)}
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

// idRuns writes sorted ids as runs of consecutive ids, [first, last] each,
// so an audit event of a download of the whole study stays small.
func idRuns(ids []int64) [][2]int64 {
	var out [][2]int64
	for _, id := range ids {
		if n := len(out); n > 0 && out[n-1][1]+1 == id {
			out[n-1][1] = id
			continue
		}
		out = append(out, [2]int64{id, id})
	}
	return out
}
