package web

import (
	"fmt"
	"net/http"
	"net/url"
	"slices"
	"strconv"
	"strings"

	"cohortdesk/cohort/followup"
	"cohortdesk/db"
	"cohortdesk/views"
	"cohortdesk/views/components"
)

// The case list and its bulk actions.

// caseFilter reads the case list's filter from the query string, strictly
// (a value the list cannot use is a queryError). me is the signed-in
// account; workers are the people cases may be given to, nil for a role that
// sees the list de-identified (it has no owner filter).
func caseFilter(v url.Values, me int64, sites []db.Site, workers []db.User) (db.CaseFilter, views.CaseFilterForm, error) {
	q := readQuery(v)
	form := views.CaseFilterForm{State: q.get("state"), Owner: q.get("owner"), Overdue: q.flag("overdue"),
		Search: q.text("q"), Sort: q.oneOf("sort", "due", "flagged", "study_id"), Desc: q.flag("desc")}
	f := db.CaseFilter{Overdue: form.Overdue, After: q.get("after"), Search: form.Search, Sort: form.Sort, Desc: form.Desc}
	switch form.State {
	case "", "working":
	case "final":
		f.Scope = db.EndedCases
	case "all":
		f.Scope = db.AllCases
	default:
		f.State = followup.State(form.State) // an unknown state is refused by the filter's check
	}
	f.SiteID = siteParam(q, "site", sites)
	if f.SiteID > 0 {
		form.Site = strconv.Itoa(f.SiteID)
	}
	switch {
	case form.Owner == "":
	case workers == nil:
		q.refuse("owner", "this list has no owner filter for your role")
	case form.Owner == "none":
		f.Unowned = true
	case form.Owner == "me":
		f.OwnerID = me
	default:
		id, err := strconv.ParseInt(form.Owner, 10, 64)
		if err != nil || !slices.ContainsFunc(workers, func(u db.User) bool { return u.ID == id }) {
			q.refuse("owner", "choose a person from the list")
			break
		}
		f.OwnerID = id
	}
	if err := q.check(f.Check()); err != nil {
		return f, form, err
	}
	return f, form, q.err()
}

func stateOptions() []views.Option {
	out := []views.Option{{Value: "", Label: "still being worked"}, {Value: "final", Label: "ended"}, {Value: "all", Label: "all"}}
	for _, st := range followup.States() {
		out = append(out, views.Option{Value: string(st), Label: st.Label()})
	}
	return out
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
	sites, siteList, err := s.siteOptions(ctx)
	if err != nil {
		return err
	}
	var workers []db.User
	if !deid {
		if workers, err = s.store.CaseWorkers(ctx); err != nil {
			return err
		}
		if workers == nil {
			workers = []db.User{}
		}
	}
	u, _ := userFrom(ctx)
	f, form, err := caseFilter(q, u.ID, siteList, workers)
	if err != nil {
		return err
	}
	page, err := s.store.Cases(ctx, f)
	if err != nil {
		return err
	}
	st, err := s.store.StudySettings(ctx)
	if err != nil {
		return err
	}
	m := views.CasesModel{Page: s.page(r, "Cases", "cases"), Filter: form, States: stateOptions(), Sites: sites,
		Total: page.Total, AtLeast: page.AtLeast, DeIdentified: deid, Message: msg}
	if !deid {
		m.Owners = append([]views.Option{{Value: "", Label: "anyone"}, {Value: "me", Label: "me"}, {Value: "none", Label: "nobody yet"}}, workerOptions(workers, false)...)
		m.Assignees = workerOptions(workers, true)
		m.CanAssign, m.CanLetter = caseWork.allows(role(r)), coordWork.allows(role(r))
		if m.CanLetter {
			m.BulkOutreach = bulkOutreach()
		}
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
	m.Sort = map[string]components.SortHead{}
	for _, c := range []struct{ key, label string }{{"study_id", "Study ID"}, {"due", "Due"}, {"flagged", "Flagged"}} {
		m.Sort[c.key] = sortHead("/cases", clean, c.label, c.key, f.Sort, "due", f.Desc)
	}
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
			return nil, fieldError("cases", fmt.Sprintf("%q is not a case selection; reload the list", v))
		}
		out = append(out, db.CaseRef{ID: id, Version: ver})
	}
	return out, nil
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
	u, err := url.Parse(safeBack(r.PostForm.Get("back"), "/cases"))
	if err != nil {
		u = &url.URL{Path: "/cases"}
	}
	refs, err := caseRefs(r.PostForm["case"])
	if err == nil {
		_, err = do(refs)
	}
	if err != nil {
		f, ok := refused(r, err, nil)
		if !ok {
			return err
		}
		return s.renderCases(w, r, u.Query(), f.Status, f.Message)
	}
	q := u.Query()
	q.Set("done", done)
	u.RawQuery = q.Encode()
	http.Redirect(w, r, u.String(), http.StatusSeeOther)
	return nil
}
