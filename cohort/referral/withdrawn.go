package referral

import (
	"fmt"

	"cohortdesk/cohort"
)

// ConfirmWithdrawnField is the form field by which the issuer of a summary
// for a withdrawn participant confirms that passing it on is allowed.
const ConfirmWithdrawnField = "confirm_withdrawn"

// Withdrawal is what the issuer of a summary must know when the participant
// has left the study: on which study day, under which consent version.
type Withdrawal struct {
	StudyDay       int    // days from the enrolment day to the withdrawal
	ConsentVersion string // the consent the participant signed; "" when not recorded
}

// WithdrawalOf is the withdrawal of a participant enrolled on enrolled, nil
// while they are enrolled (withdrawn nil).
func WithdrawalOf(enrolled cohort.Date, withdrawn *cohort.Date, consentVersion string) *Withdrawal {
	if withdrawn == nil {
		return nil
	}
	return &Withdrawal{StudyDay: withdrawn.DaysSince(enrolled), ConsentVersion: consentVersion}
}

// Warning words the caution shown before a summary of a withdrawn
// participant is issued: what withdrawal means for the summary and what the
// issuer can still do.
func (w Withdrawal) Warning() string {
	consent := "the consent form they signed"
	if w.ConsentVersion != "" {
		consent = fmt.Sprintf("consent version %q", w.ConsentVersion)
	}
	return fmt.Sprintf("This participant withdrew from the study on study day %d. Their follow-up cases were closed as withdrawn, "+
		"so a summary issued now cannot be signed off as a referral and is not part of any batch. What you can still do: "+
		"if the participant asked for their result to reach their physician, or %s allows results found before the withdrawal "+
		"to be passed on, confirm that below and issue the summary to hand over yourself; otherwise do not issue it, and "+
		"record the decision in a participant note. Ask the study's privacy contact when unsure.", w.StudyDay, consent)
}

// CheckIssue refuses to issue a summary of a withdrawn participant (w not
// nil) unless the issuer confirmed that passing it on is allowed.
func CheckIssue(w *Withdrawal, confirmed bool) error {
	if w == nil || confirmed {
		return nil
	}
	return &cohort.ValidationError{Fields: map[string]string{ConfirmWithdrawnField: "the participant has withdrawn: confirm that the summary may still be passed on, or do not issue it"}}
}
