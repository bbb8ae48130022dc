package web

import (
	"context"
	"errors"
	"fmt"
	"io"
	"net/http"
	"path/filepath"
	"strconv"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/db"
	"cohortdesk/views"
	"cohortdesk/views/components"
)

type screeningStore interface {
	protocolStore
	Jobs(ctx context.Context, limit int) ([]db.Job, error)
	ImportVerdicts(ctx context.Context, a cohort.Actor, name string, r io.Reader) (db.VerdictImport, error)
	VerdictImports(ctx context.Context, limit int) ([]db.ImportRecord, error)
	ExternalVerdicts(ctx context.Context, participantID int64) ([]db.ExternalVerdict, error)
	ScreenResults(ctx context.Context, participantID int64, protocolID int) ([]db.StoredResult, error)
	WearWeek(ctx context.Context, p db.Participant, week int) (cohort.Week, error)
	StartExploration(ctx context.Context, a cohort.Actor, protocolID int, param string, values []float64) (int64, error)
	Exploration(ctx context.Context, id int64) (db.ExplorationRun, error)
	Explorations(ctx context.Context, limit int) ([]db.ExplorationRun, error)
}

// maxVerdictUpload bounds a verdicts file: a line per participant-week of a
// large study fits with room to spare.
const maxVerdictUpload = 256 << 20

func jobTone(state string) components.Tone {
	switch state {
	case db.JobDone:
		return components.OK
	case db.JobFailed:
		return components.Alarm
	case db.JobRunning:
		return components.Info
	}
	return components.Neutral
}

func stamp(t *time.Time) string {
	if t == nil {
		return ""
	}
	return t.UTC().Format("2006-01-02 15:04:05 UTC")
}

// screeningJobs lists the screening runs with their progress and errors.
func (s *Server) screeningJobs(w http.ResponseWriter, r *http.Request) error {
	ctx := r.Context()
	jobs, err := s.store.Jobs(ctx, 50)
	if err != nil {
		return err
	}
	rl := role(r)
	m := views.JobsModel{Page: s.page(r, "Screening", "screening"), CanImport: coordWork.allows(rl), CanExplore: tuning.allows(rl),
		CanAdmin: adminOnly.allows(rl)}
	if p, err := s.store.ActiveProtocol(ctx); err == nil {
		m.Active = p.Label()
		if m.CanAdmin {
			m.ActiveHref = protocolHref(p.ID)
		}
	} else if !errors.Is(err, cohort.ErrNotFound) {
		return err
	}
	for _, j := range jobs {
		row := views.JobRow{ID: j.ID, Label: j.Label, State: j.State, Tone: jobTone(j.State), Done: j.Done, Total: j.Total,
			Attempts: fmt.Sprintf("%d of %d", j.Attempts, j.MaxAttempts), Error: j.Error, Outcome: j.Outcome,
			Created: stamp(&j.CreatedAt), Finished: stamp(j.FinishedAt), By: j.CreatedBy}
		if j.Total > 0 {
			row.Percent = fmt.Sprintf("(%d%%)", j.Done*100/j.Total)
		}
		if j.State == db.JobQueued || j.State == db.JobRunning {
			m.Running = true
		}
		m.Jobs = append(m.Jobs, row)
	}
	return s.ok(w, r, views.Jobs(m))
}

func importTone(status string) components.Tone {
	switch status {
	case "done":
		return components.OK
	case "failed", "interrupted":
		return components.Alarm
	}
	return components.Info
}

func (s *Server) externalPage(w http.ResponseWriter, r *http.Request, status int, errs map[string]string, res *views.ExternalResult) error {
	list, err := s.store.VerdictImports(r.Context(), 20)
	if err != nil {
		return err
	}
	m := views.ExternalModel{Page: s.page(r, "External verdicts", "screening"), Errors: errs, Result: res}
	for _, im := range list {
		m.Imports = append(m.Imports, views.VerdictImportRow{ID: im.ID, File: im.File, Status: im.Status, Tone: importTone(im.Status),
			When: im.StartedAt.UTC().Format("2006-01-02 15:04 UTC"), Actor: im.Actor, Message: im.Message})
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
	var ve *cohort.ValidationError
	if errors.As(err, &ve) {
		return s.externalPage(w, r, http.StatusUnprocessableEntity, ve.Fields, nil)
	}
	if err != nil {
		return err
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
		out[i] = views.ExternalVerdictRow{Week: v.Week, Model: v.ModelName + " " + v.ModelVersion, Score: score, Verdict: v.Verdict, Tone: verdictTone(v.Verdict)}
	}
	return out
}
