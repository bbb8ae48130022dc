package web

// The external verdicts page: verdicts of another algorithm imported from a
// file, kept apart from ours.

import (
	"errors"
	"net/http"
	"path/filepath"
	"strconv"

	"cohortdesk/db"
	"cohortdesk/views"
)

// maxVerdictUpload bounds a verdicts file: a line per participant-week of a
// large study fits with room to spare.
const maxVerdictUpload = 256 << 20

func (s *Server) externalPage(w http.ResponseWriter, r *http.Request, status int, errs map[string]string, res *views.ExternalResult) error {
	list, err := s.store.VerdictImports(r.Context(), 20)
	if err != nil {
		return err
	}
	m := views.ExternalModel{Page: s.page(r, "External verdicts", "screening"), Errors: errs, Result: res}
	loc := s.studyZone(r.Context())
	for _, im := range list {
		status, tone := importOutcome(im.Status, im.Accepted, im.Rejected, im.Duplicates)
		m.Imports = append(m.Imports, views.VerdictImportRow{ID: im.ID, File: im.File, Status: status, Tone: tone,
			When: when(im.StartedAt, loc), Actor: im.Actor, Message: im.Message})
	}
	s.render(w, r, status, views.External(m))
	return nil
}

func (s *Server) externalVerdictsForm(w http.ResponseWriter, r *http.Request) error {
	return s.externalPage(w, r, http.StatusOK, nil, nil)
}

// externalVerdictsImport stores an uploaded verdicts file and reports it.
func (s *Server) externalVerdictsImport(w http.ResponseWriter, r *http.Request) error {
	u, _ := userFrom(r.Context())
	release, ok := s.uploads.take(u.ID)
	if !ok {
		return errTooManyUploads
	}
	defer release()
	r.Body = http.MaxBytesReader(w, r.Body, maxVerdictUpload)
	f, hdr, err := r.FormFile("file")
	if err != nil {
		var mbe *http.MaxBytesError
		if errors.As(err, &mbe) {
			return s.externalPage(w, r, http.StatusRequestEntityTooLarge, map[string]string{"file": "the file is larger than 256 MB; split it"}, nil)
		}
		return s.externalPage(w, r, http.StatusUnprocessableEntity, map[string]string{"file": "choose a CSV file of verdicts"}, nil)
	}
	defer f.Close()
	res, err := s.store.ImportVerdicts(r.Context(), s.actor(r), filepath.Base(hdr.Filename), f)
	if err != nil {
		no, ok := refused(r, err, nil)
		if !ok {
			return err
		}
		return s.externalPage(w, r, no.Status, no.Fields, nil)
	}
	out := &views.ExternalResult{File: res.File, Summary: res.Summary(), Added: res.Added, Replaced: res.Replaced,
		Duplicates: res.Duplicates, Rejected: res.Rejected}
	const show = 200
	for i, rj := range res.Rejections {
		if i == show {
			break
		}
		msg := rj.Message
		if rj.Field != "" {
			msg = rj.Field + ": " + msg
		}
		out.Rejects = append(out.Rejects, views.RejectRow{Line: rj.Line, Reason: rj.Reason, Message: msg})
	}
	out.More = res.Rejected - len(out.Rejects)
	return s.externalPage(w, r, http.StatusOK, nil, out)
}

// externalRows formats a participant's external verdicts for the page.
func externalRows(vs []db.ExternalVerdict) []views.ExternalVerdictRow {
	out := make([]views.ExternalVerdictRow, len(vs))
	for i, v := range vs {
		score := ""
		if v.Score != nil {
			score = strconv.FormatFloat(*v.Score, 'g', 4, 64)
		}
		out[i] = views.ExternalVerdictRow{Week: v.Week, Model: v.ModelName + " " + v.ModelVersion, Score: score, Verdict: v.Verdict.Label(), Tone: verdictTone(v.Verdict)}
	}
	return out
}
