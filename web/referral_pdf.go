package web

import (
	"cohortdesk/cohort/referral"
	"cohortdesk/views/referralpdf"
)

// Paper sizes of the summary, as recorded and as chosen in the print view.
const (
	paperA4     = referralpdf.PaperA4
	paperLetter = referralpdf.PaperLetter
)

// paperOf reads a paper choice; anything else is A4.
func paperOf(v string) string {
	if v == paperLetter {
		return paperLetter
	}
	return paperA4
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
