package web

import (
	"context"
	"fmt"
	"net/http"
	"net/url"
	"os"
	"regexp"
	"strings"
	"testing"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
	"cohortdesk/cohort/referral"
)

// TestReferralOnlyThroughSignOff (issue 19, finding 1 and the closing items
// of finding 8): the case page offers no closing as "referred" and none is
// chosen for the person, and a hand-made closing as referred is refused;
// issuing a summary leads to its record, where the draft is marked and the
// investigator signs it off (one prompt: the review box); the PDF is marked
// as a draft until then and names the signer and the study day after, each
// PDF matching the digest recorded with its content.
func TestReferralOnlyThroughSignOff(t *testing.T) {
	a := newApp(t)
	_, _, pids, cases := demoCanaries(t, a)
	var sid string
	for k := range pids {
		sid = k
		break
	}
	id := cases[sid]
	a.exec(`UPDATE cases SET state = 'over_read', over_read_at = recording_back_at WHERE id = $1`, id)
	coord, inv := a.signIn(cohort.Coordinator), a.signIn(cohort.Investigator)

	_, page := a.get(coord, fmt.Sprintf("/cases/%d", id))
	close := section(page, "form-close")
	if close == "" {
		t.Fatal("an over-read case offers no closing")
	}
	if strings.Contains(close, `value="referred"`) {
		t.Error("the case page offers to close the case as referred")
	}
	if regexp.MustCompile(`<option value="closed_[a-z_]+" selected`).MatchString(close) ||
		!regexp.MustCompile(`<select id="close-state" name="close-state" required[^>]*>\s*<option value="">`).MatchString(close) {
		t.Errorf("the closing list chooses for the person:\n%s", close)
	}
	res, refusal := a.postFormBody(coord, fmt.Sprintf("/cases/%d/close", id), url.Values{"version": {itoa(int64(caseVersion(t, a, id)))},
		"close-state": {"referred"}, "reason": {"sent to the physician"}})
	if res.StatusCode != http.StatusUnprocessableEntity || !strings.Contains(refusal, "signs the case&#39;s referral summary off") {
		t.Errorf("closing as referred by hand: status %d", res.StatusCode)
	}
	if c, _ := a.store.Case(context.Background(), id); c.State != followup.OverRead {
		t.Fatalf("the refused closing moved the case to %s", c.State)
	}

	// Issuing leads to the record, a draft.
	res, _ = a.post(coord, fmt.Sprintf("/participants/%d/referral", pids[sid]), url.Values{"case": {itoa(id)}, "paper": {"letter"}})
	m := regexp.MustCompile(`^/referrals/(\d+)\?done=issued$`).FindStringSubmatch(res.Header.Get("Location"))
	if res.StatusCode != http.StatusSeeOther || m == nil {
		t.Fatalf("issue: status %d, to %q; want the summary's record", res.StatusCode, res.Header.Get("Location"))
	}
	ref := m[1]
	_, page = a.get(inv, "/referrals/"+ref+"?done=issued")
	for _, want := range []string{`data-testid="draft-mark"`, "waiting for an investigator&#39;s sign-off", `data-testid="form-signoff"`, "issued as a draft"} {
		if !strings.Contains(page, want) {
			t.Errorf("the draft's record lacks %s", want)
		}
	}
	if strings.Contains(section(page, "form-signoff"), "data-confirm") {
		t.Error("the sign-off asks twice: a review box and a confirmation dialog")
	}
	pdfOf := func() (string, string) {
		t.Helper()
		res, err := coord.Get(a.ts.URL + "/referrals/" + ref + "/pdf")
		if err != nil {
			t.Fatal(err)
		}
		b := body(t, res)
		if res.StatusCode != http.StatusOK || res.Header.Get("X-Content-SHA256") != sha256Hex(b) {
			t.Fatalf("PDF: status %d", res.StatusCode)
		}
		return pdfText(t, b), sha256Hex(b)
	}
	text, digest := pdfOf()
	var issuedPDF string
	a.store.Pool().QueryRow(context.Background(), `SELECT pdf_sha256 FROM referrals WHERE id = $1`, ref).Scan(&issuedPDF)
	if !strings.Contains(text, "DRAFT") || strings.Contains(text, "Signed off by") || digest != issuedPDF {
		t.Errorf("the draft PDF: draft mark %v, digest %s (recorded %s)", strings.Contains(text, "DRAFT"), digest, issuedPDF)
	}

	if res, _ := a.post(inv, "/referrals/"+ref+"/signoff", url.Values{"reviewed": {"yes"}}); res.StatusCode != http.StatusSeeOther {
		t.Fatalf("sign-off: status %d", res.StatusCode)
	}
	text, digest = pdfOf()
	var signedPDF string
	a.store.Pool().QueryRow(context.Background(), `SELECT signed_pdf_sha256 FROM referrals WHERE id = $1`, ref).Scan(&signedPDF)
	if strings.Contains(text, "DRAFT") || !containsWrapped(text, "Signed off by Test Investigator (investigator) on study day") || digest != signedPDF {
		t.Errorf("the signed PDF: %q, digest %s (recorded %s)", text[:min(len(text), 400)], digest, signedPDF)
	}
	_, page = a.get(coord, "/referrals/"+ref)
	if !strings.Contains(page, `data-testid="signed-mark"`) || !strings.Contains(page, "content as issued") || !strings.Contains(page, `data-testid="draft-digests"`) {
		t.Error("the signed record does not show the sign-off, its digest check or the draft's digests")
	}
	if c, _ := a.store.Case(context.Background(), id); c.State != followup.Referred {
		t.Errorf("case after the sign-off: %s", c.State)
	}
}

// TestOneWayToEachStep (issue 19, finding 8: "Move to recording received"
// and "Record return" were two ways to one step): a case whose recorder is
// out offers the return, and no move; a move to "recording received" by
// hand is refused with the way to get there.
func TestOneWayToEachStep(t *testing.T) {
	a := newApp(t)
	ids := shippedCases(t, a, 1)
	coord := a.signIn(cohort.Coordinator)
	path := fmt.Sprintf("/cases/%d", ids[0])
	_, page := a.get(coord, path)
	if !strings.Contains(page, `data-testid="form-return"`) || strings.Contains(page, `data-testid="form-move"`) ||
		strings.Contains(page, `<option value="recording_received"`) {
		t.Error("a case with the recorder out offers a move beside the return")
	}
	v := caseVersion(t, a, ids[0])
	res, body := a.postFormBody(coord, path+"/move", url.Values{"version": {itoa(int64(v))}, "state": {"recording_received"}})
	if res.StatusCode != http.StatusUnprocessableEntity || !strings.Contains(body, "record the recording&#39;s return") {
		t.Errorf("a move to recording received by hand: status %d", res.StatusCode)
	}
	if caseVersion(t, a, ids[0]) != v {
		t.Error("the refused move changed the case")
	}
}

// TestSummaryIssuedBeforeDraftsStillVerifies (issue 19, finding 1): a
// summary recorded before drafts existed (the content of
// cohort/referral/testdata, with the digest that version recorded) and
// signed off then, without signed content, still matches its digest, shows
// no draft mark, and draws the PDF whose digest was recorded.
func TestSummaryIssuedBeforeDraftsStillVerifies(t *testing.T) {
	a := newApp(t)
	ids := seedFollowUp(t, a.store, 1)
	content, err := os.ReadFile("../cohort/referral/testdata/issued-before-label-fix.json")
	if err != nil {
		t.Fatal(err)
	}
	const digest = "bf278978be710b25721efcb68dff2c6cf0c3ea0b3369e96414a3b03c2302913f" // recorded then (cohort/referral TestIssuedBeforeTheLabelFix)
	sum, err := referral.Decode(content)
	if err != nil {
		t.Fatal(err)
	}
	pdf, err := referralPDF(sum, paperA4)
	if err != nil {
		t.Fatal(err)
	}
	var id int64
	if err := a.store.Pool().QueryRow(context.Background(), `INSERT INTO referrals (participant_id, case_id, referral_code, content, content_sha256,
		    format, paper, pdf_sha256, issued_by, issued_at, signed_off_by, signed_off_at)
		SELECT participant_id, id, $2, $3, $4, 'pdf', 'a4', $5, 'Earlier Issuer', now() - interval '30 days', 'Earlier Signer', now() - interval '29 days'
		FROM cases WHERE id = $1 RETURNING id`, ids[0], sum.ReferralCode, content, digest, sha256Hex(pdf)).Scan(&id); err != nil {
		t.Fatal(err)
	}
	coord := a.signIn(cohort.Coordinator)
	_, page := a.get(coord, fmt.Sprintf("/referrals/%d", id))
	if !strings.Contains(page, "content as issued") || strings.Contains(page, `data-testid="draft-mark"`) || !strings.Contains(page, "Earlier Signer") {
		t.Error("the earlier summary does not verify, or shows a draft mark, or loses its sign-off")
	}
	res, err := coord.Get(a.ts.URL + fmt.Sprintf("/referrals/%d/pdf", id))
	if err != nil {
		t.Fatal(err)
	}
	if got := sha256Hex(body(t, res)); res.StatusCode != http.StatusOK || got != sha256Hex(pdf) {
		t.Errorf("the earlier summary's PDF: status %d, digest %s, recorded %s", res.StatusCode, got, sha256Hex(pdf))
	}
}
