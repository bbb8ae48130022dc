package web

import (
	"context"
	"fmt"
	"math"
	"net/http"
	"sort"
	"strconv"
	"strings"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/screen"
	"cohortdesk/db"
	"cohortdesk/views"
)

type protocolStore interface {
	Protocols(ctx context.Context) ([]db.ProtocolVersion, error)
	Protocol(ctx context.Context, id int) (db.ProtocolVersion, error)
	ActiveProtocol(ctx context.Context) (db.ProtocolVersion, error)
	CreateProtocolVersion(ctx context.Context, a cohort.Actor, in db.NewProtocolVersion) (db.ProtocolVersion, error)
	ActivateProtocol(ctx context.Context, a cohort.Actor, id int) (db.ProtocolVersion, error)
	EnqueueScreenBy(ctx context.Context, a cohort.Actor, participantIDs []int64, protocolID int) (int64, error)
}

func init() {
	views.RegisterAdminLink("/admin/protocols", "Screening protocols: versions, parameters, what each changed, the active one")
}

func protocolHref(id int) string { return "/admin/protocols/" + strconv.Itoa(id) }

func protocolRow(p db.ProtocolVersion, labels map[int]string, loc *time.Location) views.ProtocolRow {
	return views.ProtocolRow{ID: p.ID, Label: p.Label(), Href: protocolHref(p.ID), Active: p.Active, Used: p.Used, Results: p.Results,
		BasedOn: labels[p.BasedOn], CreatedAt: when(p.CreatedAt, loc), CreatedBy: p.CreatedBy, Note: p.Note}
}

func (s *Server) protocolsList(w http.ResponseWriter, r *http.Request) error {
	ps, err := s.store.Protocols(r.Context())
	if err != nil {
		return err
	}
	labels := map[int]string{}
	for _, p := range ps {
		labels[p.ID] = p.Label()
	}
	m := views.ProtocolsModel{Page: s.page(r, "Screening protocols", "admin")}
	loc := s.studyZone(r.Context())
	for _, p := range ps {
		m.Rows = append(m.Rows, protocolRow(p, labels, loc))
	}
	if r.URL.Query().Get("activated") != "" {
		m.Page.Flash = "The active protocol was changed."
	}
	return s.ok(w, r, views.Protocols(m))
}

// protocolParam reads {id}; anything but a stored version is 404.
func (s *Server) protocolParam(r *http.Request) (db.ProtocolVersion, error) {
	id, err := idParam(r)
	if err != nil || id > math.MaxInt32 {
		return db.ProtocolVersion{}, errNotFound
	}
	return s.store.Protocol(r.Context(), int(id))
}

func (s *Server) protocolShow(w http.ResponseWriter, r *http.Request) error {
	p, err := s.protocolParam(r)
	if err != nil {
		return err
	}
	m := views.ProtocolModel{Page: s.page(r, p.Label(), "admin"), JSON: protocolJSON(p.Params)}
	labels := map[int]string{}
	if p.BasedOn != 0 {
		base, err := s.store.Protocol(r.Context(), p.BasedOn)
		if err != nil {
			return err
		}
		labels[base.ID] = base.Label()
		m.BasedOn, m.BasedOnHref = base.Label(), protocolHref(base.ID)
		for _, c := range base.Params.Diff(p.Params) {
			m.Changes = append(m.Changes, views.ChangeRow{Field: c.Field, Label: screen.ParamLabel(c.Field), Old: c.Old, New: c.New})
		}
	}
	m.Version = protocolRow(p, labels, s.studyZone(r.Context()))
	for _, l := range p.Params.Params() {
		m.Params = append(m.Params, views.ParamRow{Path: l.Path, Label: screen.ParamLabel(l.Path), Value: l.Value})
	}
	switch r.URL.Query().Get("flash") {
	case "created":
		m.Page.Flash = "Version created. It screens nothing until you make it active."
	case "activated":
		m.Page.Flash = "This version is now active."
	case "rescreen":
		m.Page.Flash = "This version is now active; every participant is being screened with it (see Screening)."
	}
	return s.ok(w, r, views.ProtocolPage(m))
}

// protocolGroups arranges the leaves into fieldsets: general, one per window
// size, the beat-interval method and the personal baseline.
func protocolGroups(p screen.Protocol, vals map[string]string) []views.ParamGroup {
	var groups []views.ParamGroup
	index := map[string]int{}
	for _, l := range p.Params() {
		key, legend := "general", "General"
		switch {
		case strings.HasPrefix(l.Path, "windows["):
			i, _ := strconv.Atoi(strings.TrimPrefix(l.Path[:strings.Index(l.Path, "]")], "windows["))
			key = l.Path[:strings.Index(l.Path, "]")+1]
			legend = fmt.Sprintf("Window size %d (%d minutes)", i+1, p.Windows[i].Minutes)
		case strings.HasPrefix(l.Path, "rr."):
			key, legend = "rr", "Beat-to-beat (RR) method (defaults from memory of the published method)"
		case strings.HasPrefix(l.Path, "baseline."):
			key, legend = "baseline", "Personal baseline"
		}
		gi, ok := index[key]
		if !ok {
			gi = len(groups)
			index[key] = gi
			groups = append(groups, views.ParamGroup{Legend: legend})
		}
		v := l.Value
		if vals != nil {
			if sv, ok := vals[l.Path]; ok {
				v = sv
			}
		}
		groups[gi].Fields = append(groups[gi].Fields, views.ParamField{Path: l.Path, Label: screen.ParamLabel(l.Path), Kind: l.Kind, Value: v})
	}
	return groups
}

func (s *Server) protocolNew(w http.ResponseWriter, r *http.Request) error {
	base, err := s.protocolParam(r)
	if err != nil {
		return err
	}
	return s.protocolFormPage(w, r, http.StatusOK, base, base.Params, nil, "", protocolJSON(base.Params), nil)
}

func (s *Server) protocolFormPage(w http.ResponseWriter, r *http.Request, status int, base db.ProtocolVersion, shown screen.Protocol,
	vals map[string]string, note, js string, errs map[string]string) error {
	m := views.ProtocolFormModel{Page: s.page(r, "New version from "+base.Label(), "admin"), BaseID: base.ID, BaseLabel: base.Label(),
		BaseHref: protocolHref(base.ID), Note: note, JSON: js, Errors: errs, Groups: protocolGroups(shown, vals)}
	// Messages for fields the field form has no input for are listed on top.
	inputs := map[string]bool{"note": true, "json-note": true, "params": true, "form": true}
	for _, l := range shown.Params() {
		inputs[l.Path] = true
	}
	for f, msg := range errs {
		if !inputs[f] {
			m.Unplaced = append(m.Unplaced, views.ChangeRow{Field: f, New: msg})
		}
	}
	sort.Slice(m.Unplaced, func(i, j int) bool { return m.Unplaced[i].Field < m.Unplaced[j].Field })
	s.render(w, r, status, views.ProtocolForm(m))
	return nil
}

// protocolCreate makes a new version from the field form or the JSON form.
func (s *Server) protocolCreate(w http.ResponseWriter, r *http.Request) error {
	if err := r.ParseForm(); err != nil {
		return err
	}
	baseID, err := strconv.Atoi(r.PostForm.Get("base_id"))
	if err != nil || baseID <= 0 {
		return errNotFound
	}
	base, err := s.store.Protocol(r.Context(), baseID)
	if err != nil {
		return err
	}
	note := r.PostForm.Get("note")
	var params screen.Protocol
	var vals map[string]string
	js := r.PostForm.Get("params")
	if r.PostForm.Get("mode") == "json" {
		params, err = decodeProtocolJSON(js)
		if err != nil {
			return s.protocolFailure(w, r, base, base.Params, nil, note, js, err)
		}
	} else {
		var errs map[string]string
		params, vals, errs = protocolFromForm(base.Params, func(k string) (string, bool) {
			v, ok := r.PostForm[k]
			if !ok || len(v) == 0 {
				return "", false
			}
			return v[0], true
		})
		js = protocolJSON(params)
		if len(errs) > 0 {
			if strings.TrimSpace(note) == "" {
				errs["note"] = "say what this version changes and why"
			}
			return s.protocolFailure(w, r, base, base.Params, vals, note, js, &cohort.ValidationError{Fields: errs})
		}
	}
	v, err := s.store.CreateProtocolVersion(r.Context(), s.actor(r), db.NewProtocolVersion{BasedOn: base.ID, Params: params, Note: note})
	if err != nil {
		shown := base.Params
		if r.PostForm.Get("mode") == "json" {
			shown = params // fields added in the JSON show as inputs
		}
		return s.protocolFailure(w, r, base, shown, vals, note, js, err)
	}
	http.Redirect(w, r, protocolHref(v.ID)+"?flash=created", http.StatusSeeOther)
	return nil
}

// protocolFailure shows the form again after a refusal (see refused): the
// messages beside the parameters, the note's also beside the JSON form's note.
func (s *Server) protocolFailure(w http.ResponseWriter, r *http.Request, base db.ProtocolVersion, shown screen.Protocol,
	vals map[string]string, note, js string, err error) error {
	f, ok := refused(r, err, nil)
	if !ok {
		return err
	}
	errs := f.Fields
	if msg, ok := errs["note"]; ok {
		errs["json-note"] = msg
	}
	if vals == nil {
		vals = map[string]string{}
		for _, l := range shown.Params() {
			vals[l.Path] = l.Value
		}
	}
	return s.protocolFormPage(w, r, f.Status, base, shown, vals, note, js, errs)
}

// protocolActivate makes a version active and, when asked, queues the
// screening of every participant with it.
func (s *Server) protocolActivate(w http.ResponseWriter, r *http.Request) error {
	p, err := s.protocolParam(r)
	if err != nil {
		return err
	}
	if err := r.ParseForm(); err != nil {
		return err
	}
	if _, err := s.store.ActivateProtocol(r.Context(), s.actor(r), p.ID); err != nil {
		return err
	}
	flash := "activated"
	if r.PostForm.Get("rescreen") != "" {
		if _, err := s.store.EnqueueScreenBy(r.Context(), s.actor(r), nil, p.ID); err != nil {
			return err
		}
		flash = "rescreen"
	}
	http.Redirect(w, r, protocolHref(p.ID)+"?flash="+flash, http.StatusSeeOther)
	return nil
}
