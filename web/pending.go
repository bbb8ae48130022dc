package web

import (
	"context"
	"net/http"

	"cohortdesk/db"
	"cohortdesk/views"
)

// participantCharts adds the heart-rate chart of the chosen week.
func (s *Server) participantCharts(r *http.Request, p db.Participant, lines []db.WeekLine, m *views.ParticipantModel) error {
	return nil
}

// afterImport starts background screening of the participants whose data
// changed.
func (s *Server) afterImport(ctx context.Context, rep db.ImportReport) {}

// progressCascade adds the screening cascade to the progress page.
func (s *Server) progressCascade(r *http.Request, m *views.ProgressModel) {}
