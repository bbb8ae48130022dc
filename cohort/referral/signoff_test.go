package referral

import (
	"errors"
	"os"
	"testing"
	"time"
)

// TestSignOffIsNewContent: a summary is issued as a draft; signing it off
// makes new content that names the signer and the study day, with a digest
// of its own, and leaves the draft as it was recorded. A summary signed once
// cannot be signed again.
func TestSignOffIsNewContent(t *testing.T) {
	src := source(t)
	draft := mustBuild(t, src)
	if !draft.Draft || draft.SignOff != nil || draft.Status() != Drafted {
		t.Fatalf("an issued summary is not a draft: draft %v, sign-off %v", draft.Draft, draft.SignOff)
	}
	draftDigest, err := Digest(draft)
	if err != nil {
		t.Fatal(err)
	}
	// 2025-03-10 16:30 UTC is 10:30 in Chicago: 63 days after the enrolment
	// day 2025-01-06 (computed).
	at := time.Date(2025, 3, 10, 16, 30, 0, 0, time.UTC)
	signed, err := Sign(draft, " Dr Ilka Marrow ", src.EnrolledOn, src.Location, at)
	if err != nil {
		t.Fatal(err)
	}
	if signed.Draft || signed.Status() != Signed || signed.SignOff == nil || *signed.SignOff != (SignOffView{By: "Dr Ilka Marrow", StudyDay: 63}) {
		t.Fatalf("signed summary: draft %v, sign-off %+v", signed.Draft, signed.SignOff)
	}
	if got := signed.SignOff.Text(); got != "Signed off by Dr Ilka Marrow on study day 63" {
		t.Errorf("sign-off worded %q", got)
	}
	signedDigest, _ := Digest(signed)
	if signedDigest == draftDigest {
		t.Error("the signed summary digests like the draft: the digest does not cover the sign-off")
	}
	if d, _ := Digest(draft); d != draftDigest || !draft.Draft || draft.SignOff != nil {
		t.Error("signing changed the draft")
	}
	b, err := Content(signed)
	if err != nil {
		t.Fatal(err)
	}
	back, err := Decode(b)
	if err != nil {
		t.Fatal(err)
	}
	if d, _ := Digest(back); d != signedDigest || back.SignOff == nil || back.SignOff.By != "Dr Ilka Marrow" {
		t.Errorf("the signed content does not read back: %+v", back.SignOff)
	}
	if _, err := Sign(signed, "Someone Else", src.EnrolledOn, src.Location, at); !errors.Is(err, ErrInvalid) {
		t.Errorf("a second sign-off: %v", err)
	}
	if _, err := Sign(draft, "  ", src.EnrolledOn, src.Location, at); !errors.Is(err, ErrInvalid) {
		t.Errorf("a sign-off without a name: %v", err)
	}
}

// TestSummariesIssuedBeforeDraftsKeepTheirStatus: content recorded before
// drafts existed reads as issued (neither draft nor signed), so it is drawn
// as it was; its digest is checked by TestIssuedBeforeTheLabelFix.
func TestSummariesIssuedBeforeDraftsKeepTheirStatus(t *testing.T) {
	b, err := os.ReadFile("testdata/issued-before-label-fix.json")
	if err != nil {
		t.Fatal(err)
	}
	s, err := Decode(b)
	if err != nil {
		t.Fatal(err)
	}
	if s.Status() != Issued || s.Draft || s.SignOff != nil {
		t.Errorf("an old summary reads as %v", s.Status())
	}
}
