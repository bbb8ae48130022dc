package web

import (
	"context"
	"encoding/csv"
	"fmt"
	"net/http"
	"net/url"
	"strconv"
	"time"

	"cohortdesk/db"
	"cohortdesk/views"
)

// auditFilter reads the filter form, strictly. From and To are whole days
// in the study's zone; the object field takes a participant's study ID
// (their events and those of their cases, recordings and referral
// summaries) or an object's number; the person field a part of a name or
// e-mail, or an account number.
func auditFilter(v url.Values, loc *time.Location) (db.AuditFilter, views.AuditFilterForm, error) {
	q := readQuery(v)
	form := views.AuditFilterForm{Action: q.text("action"), Object: q.text("object"), ObjectID: q.text("object_id"),
		From: q.get("from"), To: q.get("to"), Actor: q.text("actor")}
	f := db.AuditFilter{Action: form.Action, ObjectType: form.Object, Who: form.Actor}
	if form.ObjectID != "" {
		if _, err := strconv.ParseInt(form.ObjectID, 10, 64); err == nil {
			f.ObjectID = form.ObjectID
		} else {
			f.StudyID = form.ObjectID
		}
	}
	if d := q.date("from"); !d.IsZero() {
		f.From = d.In(loc)
	}
	if d := q.date("to"); !d.IsZero() {
		f.To = d.AddDays(1).In(loc)
	}
	f.BeforeID = q.id("before", "event number")
	return f, form, q.err()
}

// auditFilterStore finds the audit trail's events and says why a filter
// finds none.
type auditFilterStore interface {
	AuditFilterProblems(ctx context.Context, f db.AuditFilter) (map[string]string, error)
}

func (s *Server) auditList(w http.ResponseWriter, r *http.Request) error {
	ctx := r.Context()
	loc := s.studyZone(ctx)
	f, form, err := auditFilter(r.URL.Query(), loc)
	if err != nil {
		return err
	}
	f.Limit = 100
	evs, err := s.store.AuditEvents(ctx, f)
	if err != nil {
		return err
	}
	// The trail holds what people did to participants' records (and, in
	// events written before free text was kept by reference, what they
	// wrote): reading it is itself recorded, with the events shown.
	shown := make([]int64, len(evs))
	for i, e := range evs {
		shown[i] = e.ID
	}
	if err := s.store.Audit(r.Context(), s.actor(r), "audit.view", "audit_events", "", nil,
		map[string]any{"filter": r.URL.RawQuery, "event_ids": shown}); err != nil {
		return err
	}
	m := views.AuditModel{Page: s.page(r, "Audit trail", "admin"), Filter: form, Zone: loc.String()}
	problems, err := s.store.AuditFilterProblems(ctx, f)
	if err != nil {
		return err
	}
	m.Problems = map[string]string{}
	for field, key := range map[string]string{"actor": "who", "object_id": "study_id"} {
		if msg, ok := problems[key]; ok {
			m.Problems[field] = msg
		}
	}
	for _, e := range evs {
		m.Rows = append(m.Rows, auditRow(e, loc))
	}
	if len(evs) == 0 && len(m.Problems) == 0 {
		m.Empty = "No event matches these filters."
		if f.BeforeID > 0 {
			m.Empty = "No older event matches these filters."
		}
	}
	if len(evs) == f.Limit {
		q := r.URL.Query()
		q.Set("before", strconv.FormatInt(evs[len(evs)-1].ID, 10))
		m.Older = "/admin/audit?" + q.Encode()
	}
	q := r.URL.Query()
	q.Del("before")
	m.CSV = "/admin/audit.csv?" + q.Encode()
	return s.ok(w, r, views.Audit(m))
}

// auditRow words one event: when in the study's zone, what was done in
// words, the object by the study ID it belongs to, and the fields it
// changed with their values before and after.
func auditRow(e db.AuditEvent, loc *time.Location) views.AuditRow {
	row := views.AuditRow{ID: e.ID, At: when(e.At, loc), Actor: e.Actor, Action: auditActionLabel(e.Action), Key: e.Action,
		Object: auditObjectLabel(e), Addr: e.ClientAddr}
	for _, c := range e.Changes() {
		row.Changes = append(row.Changes, views.AuditChangeView{Field: auditFieldLabel(c.Field),
			Before: auditValue(c.Before, loc), After: auditValue(c.After, loc)})
	}
	return row
}

// auditCSV streams the filtered trail; the download itself is audited first.
// The file keeps the stored values whole, for machines.
func (s *Server) auditCSV(w http.ResponseWriter, r *http.Request) error {
	f, _, err := auditFilter(r.URL.Query(), s.studyZone(r.Context()))
	if err != nil {
		return err
	}
	f.BeforeID = 0
	if err := s.store.Audit(r.Context(), s.actor(r), "audit.export", "audit_events", "", nil, map[string]string{"filter": r.URL.RawQuery}); err != nil {
		return err
	}
	w.Header().Set("Content-Type", "text/csv; charset=utf-8")
	w.Header().Set("Content-Disposition", fmt.Sprintf(`attachment; filename="audit-%s.csv"`, s.now().UTC().Format("20060102-1504")))
	cw := csv.NewWriter(w)
	_ = cw.Write([]string{"id", "at_utc", "actor_id", "actor", "action", "object_type", "object_id", "study_id", "old_value", "new_value", "client_addr", "request_id"})
	err = s.store.EachAuditEvent(r.Context(), f, func(e db.AuditEvent) error {
		return cw.Write([]string{strconv.FormatInt(e.ID, 10), e.At.UTC().Format(time.RFC3339Nano), strconv.FormatInt(e.ActorID, 10),
			csvSafe(e.Actor), e.Action, e.ObjectType, csvSafe(e.ObjectID), csvSafe(e.StudyID), string(e.Old), string(e.New), e.ClientAddr, e.RequestID})
	})
	cw.Flush()
	if err != nil {
		// Headers are gone; say so in the file rather than leave it silently short.
		fmt.Fprintf(w, "\n# export interrupted: %v\n", err)
		s.log.Error("audit export", "err", err)
	}
	return nil
}
