package referralissue

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"slices"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/deid"
	"cohortdesk/cohort/overread"
	"cohortdesk/cohort/referral"
	"cohortdesk/db"
	"cohortdesk/views/components"
	"cohortdesk/views/referralpdf"
)

var secret = []byte("referral issue test secret, 32+ characters")

// fakeStore gives a fixed source and keeps what is recorded.
type fakeStore struct {
	basis    db.ReferralBasis
	asked    [2]int64
	recorded []db.ReferralIssue
	fail     error
}

func (f *fakeStore) ReferralSource(_ context.Context, pid, caseID int64) (db.ReferralBasis, error) {
	f.asked = [2]int64{pid, caseID}
	return f.basis, nil
}

func (f *fakeStore) IssueReferral(_ context.Context, a cohort.Actor, in db.ReferralIssue) (db.Referral, error) {
	if f.fail != nil {
		return db.Referral{}, f.fail
	}
	f.recorded = append(f.recorded, in)
	return db.Referral{ID: int64(len(f.recorded)), Code: in.Summary.ReferralCode, Format: in.Format, Paper: in.Paper, PDFSHA256: in.PDFSHA256, IssuedBy: a.Label()}, nil
}

func newFake() *fakeStore {
	age := 71
	return &fakeStore{basis: db.ReferralBasis{ParticipantID: 4, StudyID: "KX-0031", CaseID: 9, Confirmed: true, Source: referral.Source{
		StudyID: "KX-0031", EnrolledOn: cohort.Date{Year: 2025, Month: 1, Day: 6}, AgeAtEnrolment: &age, Sex: cohort.Female,
		OverRead: &referral.OverRead{Role: overread.First, Rhythm: overread.AF, Confidence: overread.Certain, ReadOn: cohort.Date{Year: 2025, Month: 2, Day: 10}},
	}}}
}

// TestPrepareAndRecord: the summary is built from the store's source with the
// standard cautions and the issue time given, and the record carries the
// digest of the PDF handed back, drawn on the paper asked for.
func TestPrepareAndRecord(t *testing.T) {
	ctx := context.Background()
	st := newFake()
	at := time.Date(2025, 3, 3, 15, 0, 0, 0, time.UTC)
	d, err := Prepare(ctx, st, 4, 9, secret, at)
	if err != nil {
		t.Fatal(err)
	}
	if st.asked != [2]int64{4, 9} || d.Basis.CaseID != 9 || !d.Basis.ConfirmedAF() {
		t.Errorf("asked %v, basis %+v", st.asked, d.Basis)
	}
	if d.Summary.ReferralCode != deid.Code(secret, "KX-0031") || d.Summary.IssuedStudyDay != 56 {
		t.Errorf("summary code %s, day %d (2025-03-03 is study day 56 from 2025-01-06)", d.Summary.ReferralCode, d.Summary.IssuedStudyDay)
	}
	for _, c := range components.CautionItems {
		if !slices.Contains(d.Summary.Cautions, c) {
			t.Errorf("caution %q missing", c)
		}
	}
	ref, pdf, err := Record(ctx, st, cohort.Actor{Name: "Issuer"}, d, "zip", referralpdf.PaperLetter)
	if err != nil {
		t.Fatal(err)
	}
	sum := sha256.Sum256(pdf)
	want, err := referralpdf.Render(d.Summary, referralpdf.PaperLetter)
	if err != nil {
		t.Fatal(err)
	}
	if len(st.recorded) != 1 || ref.PDFSHA256 != hex.EncodeToString(sum[:]) || !slices.Equal(pdf, want) {
		t.Fatalf("recorded %d, PDF digest %s", len(st.recorded), ref.PDFSHA256)
	}
	if in := st.recorded[0]; in.Format != "zip" || in.Paper != referralpdf.PaperLetter || in.Basis.CaseID != 9 || in.Summary.ReferralCode != d.Summary.ReferralCode {
		t.Errorf("recorded %+v", in)
	}
	// A store that refuses records nothing and hands back no PDF.
	st.fail = errors.New("read-only")
	if _, pdf, err := Record(ctx, st, cohort.Actor{}, d, "pdf", referralpdf.PaperA4); err == nil || pdf != nil {
		t.Errorf("refused record: %v, %d bytes", err, len(pdf))
	}
	// A short secret makes no summary.
	if _, err := Prepare(ctx, newFake(), 4, 9, []byte("short"), at); !errors.Is(err, deid.ErrInvalid) {
		t.Errorf("short secret: %v", err)
	}
}
