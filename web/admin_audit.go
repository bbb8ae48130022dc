package web

import (
	"encoding/csv"
	"fmt"
	"net/http"
	"net/url"
	"strconv"
	"time"

	"cohortdesk/db"
	"cohortdesk/views"
)

// auditFilter reads the filter form, strictly; dates are whole UTC days.
func auditFilter(v url.Values) (db.AuditFilter, views.AuditFilterForm, error) {
	q := readQuery(v)
	form := views.AuditFilterForm{Action: q.text("action"), Object: q.text("object"), ObjectID: q.text("object_id"),
		From: q.get("from"), To: q.get("to"), Actor: q.get("actor")}
	f := db.AuditFilter{Action: form.Action, ObjectType: form.Object, ObjectID: form.ObjectID}
	if d := q.date("from"); !d.IsZero() {
		f.From = d.In(time.UTC)
	}
	if d := q.date("to"); !d.IsZero() {
		f.To = d.AddDays(1).In(time.UTC)
	}
	f.ActorID = q.id("actor", "account number")
	f.BeforeID = q.id("before", "event number")
	return f, form, q.err()
}

func (s *Server) auditList(w http.ResponseWriter, r *http.Request) error {
	f, form, err := auditFilter(r.URL.Query())
	if err != nil {
		return err
	}
	f.Limit = 100
	evs, err := s.store.AuditEvents(r.Context(), f)
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
	m := views.AuditModel{Page: s.page(r, "Audit trail", "admin"), Filter: form}
	for _, e := range evs {
		m.Rows = append(m.Rows, views.AuditRow{ID: e.ID, At: e.At.UTC().Format("2006-01-02 15:04:05"), Actor: e.Actor, Action: e.Action,
			Object: e.ObjectType + " " + e.ObjectID, Old: string(e.Old), New: string(e.New), Addr: e.ClientAddr})
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

// auditCSV streams the filtered trail; the download itself is audited first.
func (s *Server) auditCSV(w http.ResponseWriter, r *http.Request) error {
	f, _, err := auditFilter(r.URL.Query())
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
	_ = cw.Write([]string{"id", "at_utc", "actor_id", "actor", "action", "object_type", "object_id", "old_value", "new_value", "client_addr", "request_id"})
	err = s.store.EachAuditEvent(r.Context(), f, func(e db.AuditEvent) error {
		return cw.Write([]string{strconv.FormatInt(e.ID, 10), e.At.UTC().Format(time.RFC3339Nano), strconv.FormatInt(e.ActorID, 10),
			csvSafe(e.Actor), e.Action, e.ObjectType, csvSafe(e.ObjectID), string(e.Old), string(e.New), e.ClientAddr, e.RequestID})
	})
	cw.Flush()
	if err != nil {
		// Headers are gone; say so in the file rather than leave it silently short.
		fmt.Fprintf(w, "\n# export interrupted: %v\n", err)
		s.log.Error("audit export", "err", err)
	}
	return nil
}
