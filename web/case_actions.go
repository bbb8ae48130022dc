package web

import (
	"context"
	"fmt"
	"net/http"

	"cohortdesk/cohort/followup"
	"cohortdesk/db"
)

// The actions on one case, from its page or its triage row. Each reads its
// form into typed values and calls the store, which applies followup's rules.

// caseEditFunc runs one action given the case id, the version the page
// showed and the submitted form; it returns what could not be read or the
// store's refusal.
type caseEditFunc func(ctx context.Context, id int64, version int, f *formReader) error

// caseAction reads an action's form, runs it and answers as asked: the
// triage row for htmx requests from the triage page, else a redirect; a
// refused action shows its reason (with the case as it now is).
// fieldMap renames the store's field names to the form's where they differ.
func (s *Server) caseAction(w http.ResponseWriter, r *http.Request, done string, fieldMap map[string]string, do caseEditFunc) error {
	id, err := idParam(r)
	if err != nil {
		return err
	}
	if err := r.ParseForm(); err != nil {
		return err
	}
	f := readForm(r.PostForm)
	err = do(r.Context(), id, f.version(), f)
	fromTriage := r.PostForm.Get("view") == "triage"
	if fromTriage && r.Header.Get("HX-Request") == "true" {
		return s.triageAnswer(w, r, id, err, done)
	}
	if err != nil {
		no, ok := refused(r, err, nil)
		if !ok {
			return err
		}
		c, lerr := s.store.Case(r.Context(), id)
		if lerr != nil {
			return lerr
		}
		no = no.renamed(fieldMap)
		return s.renderCase(w, r, c, no.Status, no.Fields, no.Message)
	}
	target := fmt.Sprintf("/cases/%d?done=%s", id, done)
	if fromTriage {
		target = fmt.Sprintf("/triage?done=%s#case-%d", done, id)
	}
	http.Redirect(w, r, target, http.StatusSeeOther)
	return nil
}

func (s *Server) caseAssign(w http.ResponseWriter, r *http.Request) error {
	return s.caseAction(w, r, "assign", nil, func(ctx context.Context, id int64, v int, f *formReader) error {
		_, err := s.store.AssignCase(ctx, s.actor(r), id, v, ownerParam(r, f.text("owner")))
		return err
	})
}

func (s *Server) caseAttempt(w http.ResponseWriter, r *http.Request) error {
	return s.caseAction(w, r, "attempt", map[string]string{"note": "attempt-note"}, func(ctx context.Context, id int64, v int, f *formReader) error {
		st, err := s.store.StudySettings(ctx)
		if err != nil {
			return err
		}
		in := db.AttemptInput{Version: v, Channel: followup.Channel(f.text("channel")), Outcome: followup.Outcome(f.text("outcome")),
			Note: f.raw("note"), At: f.localTime("at", st.Location())}
		if err := f.check(nil); err != nil {
			return err
		}
		_, err = s.store.LogAttempt(ctx, s.actor(r), id, in)
		return err
	})
}

func (s *Server) caseMove(w http.ResponseWriter, r *http.Request) error {
	return s.caseAction(w, r, "move", nil, func(ctx context.Context, id int64, v int, f *formReader) error {
		_, err := s.store.MoveCase(ctx, s.actor(r), id, db.MoveInput{Version: v, To: followup.State(f.text("state")), Reason: f.raw("reason")})
		return err
	})
}

func (s *Server) caseClose(w http.ResponseWriter, r *http.Request) error {
	return s.caseAction(w, r, "close", map[string]string{"state": "close-state"}, func(ctx context.Context, id int64, v int, f *formReader) error {
		_, err := s.store.CloseCase(ctx, s.actor(r), id, db.MoveInput{Version: v, To: followup.State(f.text("close-state")), Reason: f.raw("reason")})
		return err
	})
}

func (s *Server) caseShipment(w http.ResponseWriter, r *http.Request) error {
	return s.caseAction(w, r, "shipment", nil, func(ctx context.Context, id int64, v int, f *formReader) error {
		sentOn, tracking := f.date("sent_on", "date"), f.raw("tracking_number")
		if err := f.check(nil); err != nil {
			return err
		}
		_, err := s.store.RecordShipment(ctx, s.actor(r), id, v, sentOn, tracking)
		return err
	})
}

func (s *Server) caseReturn(w http.ResponseWriter, r *http.Request) error {
	return s.caseAction(w, r, "return", nil, func(ctx context.Context, id int64, v int, f *formReader) error {
		backOn := f.date("back_on", "date")
		if err := f.check(nil); err != nil {
			return err
		}
		_, err := s.store.RecordReturn(ctx, s.actor(r), id, v, backOn)
		return err
	})
}

func (s *Server) caseNote(w http.ResponseWriter, r *http.Request) error {
	return s.caseAction(w, r, "note", nil, func(ctx context.Context, id int64, v int, f *formReader) error {
		_, err := s.store.SetCaseNote(ctx, s.actor(r), id, v, f.raw("note"))
		return err
	})
}
