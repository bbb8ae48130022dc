package web

import (
	"context"
	"fmt"
	"net/http"
	"strconv"
	"strings"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
	"cohortdesk/cohort/overread"
	"cohortdesk/db"
	"cohortdesk/views"
)

// The over-read tools of the recording page (issue 19, findings 2 and 5): a
// series of over-reads without going back to the list, correcting one's own
// reading, and taking a recording off the over-read list.

// overReadTools is what the tools need from the database.
type overReadTools interface {
	ReviseOverRead(ctx context.Context, a cohort.Actor, recordingID int64, in db.RevisionInput) (db.Recording, error)
	MarkReadNotNeeded(ctx context.Context, a cohort.Actor, recordingID int64, reason string) error
	NextAwaitingRead(ctx context.Context, after int64) (int64, bool, error)
	RecordingsAwaitingRead(ctx context.Context) (int, error)
}

// awaits applies overread.Awaits to a stored recording.
func awaits(rec db.Recording) bool {
	return overread.Awaits(rec.Conclusion, rec.CaseState.Terminal(), rec.NotNeeded != "")
}

// overReadTools fills the page's tools for the signed-in person.
func (s *Server) overReadTools(r *http.Request, rec db.Recording, m *views.RecordingModel) error {
	ctx := r.Context()
	u, _ := userFrom(ctx)
	reads := followup.StepOverRead.By(u.Role)
	waiting, err := s.store.RecordingsAwaitingRead(ctx)
	if err != nil {
		return err
	}
	if m.Form != nil {
		m.Form.Others = waiting
		if awaits(rec) {
			m.Form.Others--
		}
	}
	if from, err := strconv.ParseInt(r.URL.Query().Get("from"), 10, 64); err == nil && from > 0 && r.URL.Query().Get("done") == "read-next" {
		m.PrevHref, m.Waiting = fmt.Sprintf("/recordings/%d", from), waiting
	}
	loc := s.studyZone(ctx)
	for _, v := range rec.Revisions {
		m.Earlier = append(m.Earlier, views.RevisionView{Role: v.Role.Label(), Rhythm: v.Rhythm.Label(), Confidence: v.Confidence.Label(),
			Reader: v.Reader, On: v.On.Label(), Change: v.Change.Label(), ChangedBy: v.ChangedBy,
			ChangedAt: when(v.ChangedAt, loc), Reason: v.Reason})
	}
	m.NotNeeded = views.NotNeededView{Reason: rec.NotNeeded, By: rec.NotNeededBy, CanSet: reads && awaits(rec)}
	if !rec.NotNeededAt.IsZero() {
		m.NotNeeded.At = when(rec.NotNeededAt, loc)
	}
	last := overread.Revisable(readingsOf(rec))
	if !reads || last == "" || rec.CaseState.Terminal() {
		return nil
	}
	for _, o := range rec.Readings {
		if o.Role != last || o.ReaderID != u.ID {
			continue
		}
		f := &views.RevisionFormView{Role: string(o.Role), RoleLabel: o.Role.Label(), Rhythm: string(o.Rhythm), Confidence: string(o.Confidence),
			Open: r.Method == http.MethodPost && r.URL.Path == fmt.Sprintf("/recordings/%d/over-reads/revise", rec.ID)}
		for _, rh := range overread.Rhythms() {
			f.Rhythms = append(f.Rhythms, views.Option{Value: string(rh), Label: rh.Label()})
		}
		for _, c := range overread.Confidences() {
			f.Confidences = append(f.Confidences, views.Option{Value: string(c), Label: c.Label()})
		}
		m.Revision = f
	}
	return nil
}

// afterReading answers an entered reading: the same recording, or, when the
// reader asked for it, the next recording waiting (with the way back).
func (s *Server) afterReading(w http.ResponseWriter, r *http.Request, id int64) error {
	if r.PostForm.Get("then") == "next" {
		next, ok, err := s.store.NextAwaitingRead(r.Context(), id)
		if err != nil {
			return err
		}
		if ok {
			http.Redirect(w, r, fmt.Sprintf("/recordings/%d?done=read-next&from=%d", next, id), http.StatusSeeOther)
			return nil
		}
	}
	http.Redirect(w, r, fmt.Sprintf("/recordings/%d?done=read", id), http.StatusSeeOther)
	return nil
}

// recordingRevise amends or withdraws the signed-in investigator's reading.
func (s *Server) recordingRevise(w http.ResponseWriter, r *http.Request) error {
	id, err := idParam(r)
	if err != nil {
		return err
	}
	if err := r.ParseForm(); err != nil {
		return err
	}
	field := func(k string) string { return strings.TrimSpace(r.PostForm.Get(k)) }
	in := db.RevisionInput{Role: overread.Role(field("role")), Change: overread.Change(field("change")), Rhythm: overread.Rhythm(field("rhythm")),
		Confidence: overread.Confidence(field("confidence")), Reason: r.PostForm.Get("reason")}
	_, err = s.store.ReviseOverRead(r.Context(), s.actor(r), id, in)
	if err == nil {
		http.Redirect(w, r, fmt.Sprintf("/recordings/%d?done=revised", id), http.StatusSeeOther)
		return nil
	}
	return s.refuseOnRecording(w, r, id, err, "The correction was not saved: ",
		map[string]string{"rhythm": "revise-rhythm", "confidence": "revise-confidence", "reason": "revise-reason"})
}

// recordingNotNeeded takes a recording off the over-read list, with the
// reason.
func (s *Server) recordingNotNeeded(w http.ResponseWriter, r *http.Request) error {
	id, err := idParam(r)
	if err != nil {
		return err
	}
	if err := r.ParseForm(); err != nil {
		return err
	}
	err = s.store.MarkReadNotNeeded(r.Context(), s.actor(r), id, r.PostForm.Get("reason"))
	if err == nil {
		http.Redirect(w, r, fmt.Sprintf("/recordings/%d?done=not-needed", id), http.StatusSeeOther)
		return nil
	}
	return s.refuseOnRecording(w, r, id, err, "The recording stays on the over-read list: ", nil)
}
