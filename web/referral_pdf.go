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

// referralPDF draws a summary as a PDF on the chosen paper.
func referralPDF(sum referral.Summary, paper string) ([]byte, error) {
	return referralpdf.Render(sum, paper)
}
