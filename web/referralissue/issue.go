// Package referralissue is the one way a referral summary is issued: the
// store gathers the source, cohort/referral builds the de-identified summary
// with the standard cautions, views/referralpdf draws its PDF, and the store
// records the content, both digests and who issued it. The web handlers
// (preview, issue, batch) and the demo loader both call it.
//
// It needs storage and rendering, so it cannot live in cohort/ or db/; it sits
// beside package web without importing it, because web's own tests load the
// demo, which calls this package.
package referralissue

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/referral"
	"cohortdesk/db"
	"cohortdesk/views/components"
	"cohortdesk/views/referralpdf"
)

// Store is what issuing needs from the database (*db.Store).
type Store interface {
	ReferralSource(ctx context.Context, participantID, caseID int64) (db.ReferralBasis, error)
	IssueReferral(ctx context.Context, a cohort.Actor, in db.ReferralIssue) (db.Referral, error)
}

// Draft is a summary built to be shown or issued, with the records it
// belongs to.
type Draft struct {
	Basis   db.ReferralBasis
	Summary referral.Summary
	// ConfirmedWithdrawn is the issuer's confirmation that a summary of a
	// withdrawn participant (Basis.Withdrawal) may still be passed on.
	ConfirmedWithdrawn bool
}

// Prepare builds a participant's summary as issued at the given time: for one
// of their cases when caseID is set, else for their latest case, else for the
// participant alone (db.Store.ReferralSource). The secret keys the referral
// code.
func Prepare(ctx context.Context, st Store, participantID, caseID int64, secret []byte, at time.Time) (Draft, error) {
	b, err := st.ReferralSource(ctx, participantID, caseID)
	if err != nil {
		return Draft{}, err
	}
	b.Source.Cautions = components.CautionItems
	b.Source.IssuedAt = at
	sum, err := referral.Build(b.Source, secret)
	if err != nil {
		return Draft{}, err
	}
	return Draft{Basis: b, Summary: sum}, nil
}

// Record draws a draft's PDF on the paper (referralpdf.PaperA4 or
// PaperLetter) and records the summary as issued by a in the format it is
// handed out in (html, pdf or zip). It returns the record and the PDF.
func Record(ctx context.Context, st Store, a cohort.Actor, d Draft, format, paper string) (db.Referral, []byte, error) {
	if err := referral.CheckIssue(d.Basis.Withdrawal, d.ConfirmedWithdrawn); err != nil {
		return db.Referral{}, nil, err
	}
	pdf, err := referralpdf.Render(d.Summary, paper)
	if err != nil {
		return db.Referral{}, nil, err
	}
	sum := sha256.Sum256(pdf)
	ref, err := st.IssueReferral(ctx, a, db.ReferralIssue{Basis: d.Basis, Summary: d.Summary, Format: format, Paper: paper,
		PDFSHA256: hex.EncodeToString(sum[:]), ConfirmedWithdrawn: d.ConfirmedWithdrawn})
	if err != nil {
		return db.Referral{}, nil, err
	}
	return ref, pdf, nil
}

// Signer is what signing a summary off needs from the database (*db.Store).
type Signer interface {
	SignOffReferral(ctx context.Context, a cohort.Actor, id int64, draw db.DrawSummary) (db.Referral, error)
}

// SignOff has investigator a sign the issued summary id off: the store
// records the signed content (naming a and the study day) with its digest and
// the digest of its PDF, drawn here on the recorded paper, and moves the case
// to referred.
func SignOff(ctx context.Context, st Signer, a cohort.Actor, id int64) (db.Referral, error) {
	return st.SignOffReferral(ctx, a, id, DrawDigest)
}

// DrawDigest draws a summary's PDF on the paper and returns its SHA-256 in
// hex: the digest a PDF sent later must have.
func DrawDigest(sum referral.Summary, paper string) (string, error) {
	pdf, err := referralpdf.Render(sum, paper)
	if err != nil {
		return "", err
	}
	d := sha256.Sum256(pdf)
	return hex.EncodeToString(d[:]), nil
}
