package db

import (
	"context"
	"fmt"
	"strconv"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
	"cohortdesk/cohort/overread"
	"cohortdesk/cohort/referral"

	"github.com/jackc/pgx/v5"
)

// DrawSummary draws a summary's PDF on the paper and returns its SHA-256 in
// hex (web/referralissue draws it; the store cannot).
type DrawSummary func(sum referral.Summary, paper string) (string, error)

// SignOffReferral records an investigator's sign-off of an issued summary and
// moves its case to referred, in one transaction, audited. The signed content
// (referral.Sign: the draft naming the signer and the study day) is recorded
// beside the draft with its digest and the digest of its PDF, which draw
// makes on the recorded paper. Refused: a summary
// already signed off or whose case is already referred (conflict); a summary
// without a case, or whose recorded over-read is not AF, or whose case no
// longer has an AF over-read or has ended otherwise (invalid). A case still
// waiting in "recording received" is first moved to "over-read", the step
// the over-read itself should have made.
func (s *Store) SignOffReferral(ctx context.Context, a cohort.Actor, id int64, draw DrawSummary) (Referral, error) {
	if !followup.StepSignOff.By(a.Role) {
		return Referral{}, fmt.Errorf("db: sign off referral: role %s: %w", a.Role, cohort.ErrForbidden)
	}
	refuse := func(msg string) error { return &cohort.ValidationError{Fields: map[string]string{"referral": msg}} }
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		var caseID *int64
		var content []byte
		var signedBy, paper, tz string
		var enrolled time.Time
		if err := tx.QueryRow(ctx, `SELECT f.case_id, f.content, f.signed_off_by, f.paper, p.enrolled_on, p.time_zone
			FROM referrals f JOIN participants p ON p.id = f.participant_id WHERE f.id = $1 FOR UPDATE OF f`, id).
			Scan(&caseID, &content, &signedBy, &paper, &enrolled, &tz); err != nil {
			return err
		}
		if signedBy != "" {
			return &cohort.PublicError{Message: "This summary was already signed off by " + signedBy + ".", Kind: cohort.ErrConflict}
		}
		if caseID == nil {
			return refuse("this summary was made on request for a participant without a case; only a case's summary can be signed off")
		}
		sum, err := referral.Decode(content)
		if err != nil {
			return err
		}
		if sum.OverRead == nil || sum.OverRead.Rhythm != overread.AF {
			return refuse("the summary does not report an over-read confirming atrial fibrillation; it cannot be signed off as a referral")
		}
		recs, err := concludedRecordings(ctx, tx, "r.case_id = $1", *caseID)
		if err != nil {
			return err
		}
		var settled cohort.Date
		confirmed := false
		for _, r := range recs {
			if r.confirmsAF() && (!confirmed || settled.Before(r.Conclusion.SettledOn)) {
				settled, confirmed = r.Conclusion.SettledOn, true
			}
		}
		if !confirmed {
			return refuse("the case has no over-read confirming atrial fibrillation (two readers who disagree, or a recording under 30 s, confirm nothing); issue a new summary once it has one")
		}
		c, err := lockCase(ctx, tx, *caseID)
		if err != nil {
			return err
		}
		switch {
		case c.State == followup.Referred:
			return &cohort.PublicError{Message: "The case was already referred.", Kind: cohort.ErrConflict}
		case c.State.Terminal():
			return refuse("the case has ended as " + c.State.Label() + "; it cannot be referred")
		case c.State == followup.RecordingReceived:
			at := settled.In(time.UTC).Add(12 * time.Hour)
			if _, err := s.advanceCase(ctx, tx, a, c.ID, followup.OverRead, at, ""); err != nil {
				return err
			}
		}
		reason := fmt.Sprintf("referral summary %d signed off", id)
		if _, err := s.advanceCase(ctx, tx, a, c.ID, followup.Referred, time.Time{}, reason); err != nil {
			return err
		}
		at := s.now()
		loc, err := time.LoadLocation(tz)
		if err != nil {
			loc = time.UTC
		}
		signed, err := referral.Sign(sum, a.Label(), cohort.DateOf(enrolled), loc, at)
		if err != nil {
			return err
		}
		signedContent, err := referral.Content(signed)
		if err != nil {
			return err
		}
		signedDigest, err := referral.Digest(signed)
		if err != nil {
			return err
		}
		pdfDigest, err := draw(signed, paper)
		if err != nil {
			return err
		}
		if _, err := tx.Exec(ctx, `UPDATE referrals SET signed_off_by_id = $2, signed_off_by = $3, signed_off_at = $4,
			    signed_content = $5, signed_content_sha256 = $6, signed_pdf_sha256 = $7 WHERE id = $1`,
			id, actorID(a), a.Label(), at, signedContent, signedDigest, pdfDigest); err != nil {
			return err
		}
		return audit(ctx, tx, a, "referral.signoff", "referral", strconv.FormatInt(id, 10), nil,
			map[string]any{"case_id": *caseID, "referral_code": sum.ReferralCode, "content_sha256": signedDigest, "pdf_sha256": pdfDigest})
	})
	if err != nil {
		return Referral{}, mapCaseErr("sign off referral", err)
	}
	return s.Referral(ctx, id)
}
