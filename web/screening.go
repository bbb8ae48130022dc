package web

import (
	"context"
	"errors"
	"fmt"
	"io"
	"net/http"

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
	StartSweep(ctx context.Context, a cohort.Actor, protocolID int, param string, values []float64) (int64, error)
	SweepRun(ctx context.Context, id int64) (db.SweepRun, error)
	SweepRuns(ctx context.Context, limit int) ([]db.SweepRun, error)
	DecidingWindow(ctx context.Context, protocolID int) (int, bool, error)
}

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

// screeningJobs lists the screening runs with their progress and errors.
func (s *Server) screeningJobs(w http.ResponseWriter, r *http.Request) error {
	ctx := r.Context()
	jobs, err := s.store.Jobs(ctx, 50)
	if err != nil {
		return err
	}
	rl := role(r)
	m := views.JobsModel{Page: s.page(r, "Screening", "screening"), CanImport: coordWork.allows(rl), CanSweep: tuning.allows(rl),
		CanAdmin: adminOnly.allows(rl)}
	if p, err := s.store.ActiveProtocol(ctx); err == nil {
		m.Active = p.Label()
		if m.CanAdmin {
			m.ActiveHref = protocolHref(p.ID)
		}
	} else if !errors.Is(err, cohort.ErrNotFound) {
		return err
	}
	loc := s.studyZone(ctx)
	for _, j := range jobs {
		row := views.JobRow{ID: j.ID, Label: j.Label, State: j.State, Tone: jobTone(j.State), Done: j.Done, Total: j.Total,
			Attempts: fmt.Sprintf("%d of %d", j.Attempts, j.MaxAttempts), Error: j.Error, Outcome: j.Outcome,
			Created: when(j.CreatedAt, loc), Finished: whenPtr(j.FinishedAt, loc), By: j.CreatedBy}
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
