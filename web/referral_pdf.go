package web

import (
	"cohortdesk/cohort/followup"
	"cohortdesk/cohort/referral"
	"cohortdesk/views/referralpdf"
	"context"
)

// Paper sizes of the summary, as recorded and as chosen in the print view.
const (
	paperA4     = referralpdf.PaperA4
	paperLetter = referralpdf.PaperLetter
)

// paperOf reads a paper choice; anything else is the default def (the
// study's paper, studyPaper), and A4 when def is not a paper either.
func paperOf(v, def string) string {
	for _, p := range []string{v, def} {
		if followup.Paper(p).Valid() {
			return p
		}
	}
	return paperA4
}

// studyPaper is the paper the study prints on (its settings), the default
// of every print view.
func (s *Server) studyPaper(ctx context.Context) string {
	st, err := s.store.StudySettings(ctx)
	if err != nil || !st.Paper.Valid() {
		return paperA4
	}
	return string(st.Paper)
}

// paperParam reads a paper choice from the query string, strictly;
// fallback when none is given.
func paperParam(q *query, fallback string) string {
	if p := q.oneOf("paper", paperA4, paperLetter); p != "" {
		return p
	}
	return fallback
}

// referralPDF draws a summary as a PDF on the chosen paper.
func referralPDF(sum referral.Summary, paper string) ([]byte, error) {
	return referralpdf.Render(sum, paper)
}
