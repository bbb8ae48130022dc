package db_test

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/deid"
	"cohortdesk/cohort/ecg"
	"cohortdesk/cohort/ecg/ecgtest"
	"cohortdesk/cohort/followup"
	"cohortdesk/cohort/referral"
	"cohortdesk/db"
)

var referralSecret = []byte("db test secret for referral codes, long enough")

// referralFixture has three participants with one case each, every case with
// a recording: P1's first reader says AF; P2's first reader says AF but the
// adjudication says sinus rhythm; P3 says AF but its case was closed when
// the participant withdrew.
func referralFixture(t *testing.T) (*caseFixture, map[string]int64) {
	t.Helper()
	f := newCaseFixture(t, 3)
	for _, p := range []string{"P1", "P2", "P3"} {
		f.positive(f.proto, p, 2, 3)
	}
	f.sync()
	syn, err := ecg.Synthesize(ecgtest.AFRR(50, 700, 1), ecg.SynthOptions{RateHz: 250}) // about 35 s: long enough for a diagnostic read
	if err != nil {
		t.Fatal(err)
	}
	var beats []int32
	for _, rt := range syn.RTimes {
		beats = append(beats, int32(rt*250))
	}
	cases := map[string]int64{}
	for _, p := range []string{"P1", "P2", "P3"} {
		id := f.caseID(p)
		cases[p] = id
		mustExec(t, f.s, `UPDATE cases SET state = 'recording_received', recording_back_at = $2 WHERE id = $1`, id, fixedNow.Add(-72*time.Hour))
		var rec int64
		if err := f.s.Pool().QueryRow(context.Background(), `INSERT INTO recordings (case_id, participant_id, taken_at, duration_s, too_short, waveform_format, sampling_hz, samples, beats)
			VALUES ($1, $2, $3, $4::real, $4::real < 30, 'samples', 250, $5, $6) RETURNING id`, id, f.pids[p], fixedNow.Add(-96*time.Hour), syn.Waveform.Seconds(),
			db.EncodeSamples(syn.Waveform.Samples), beats).Scan(&rec); err != nil {
			t.Fatal(err)
		}
		mustExec(t, f.s, `INSERT INTO over_reads (recording_id, case_id, participant_id, role, rhythm, reader, read_on, comment)
			VALUES ($1, $2, $3, 'first', 'af', 'Reader One', date '2026-05-29', 'typed comment stays inside')`, rec, id, f.pids[p])
		if p == "P2" {
			mustExec(t, f.s, `INSERT INTO over_reads (recording_id, case_id, participant_id, role, rhythm, reader, read_on)
				VALUES ($1, $2, $3, 'second', 'sinus', 'Reader Two', date '2026-05-30'), ($1, $2, $3, 'adjudication', 'sinus', 'Reader Three', date '2026-05-31')`,
				rec, id, f.pids[p])
		}
	}
	mustExec(t, f.s, `UPDATE cases SET state = 'closed_withdrawn', closed_at = $2 WHERE id = $1`, cases["P3"], fixedNow)
	return f, cases
}

func TestReadyToReferUsesTheEffectiveOverRead(t *testing.T) {
	f, cases := referralFixture(t)
	ready, err := f.s.ReadyToRefer(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	if len(ready) != 1 || ready[0].CaseID != cases["P1"] {
		t.Fatalf("ready %+v, want only P1's case (P2 adjudicated sinus, P3 closed)", ready)
	}
}

func issue(t *testing.T, f *caseFixture, participantID, caseID int64) db.Referral {
	t.Helper()
	ctx := context.Background()
	b, err := f.s.ReferralSource(ctx, participantID, caseID)
	if err != nil {
		t.Fatal(err)
	}
	b.Source.IssuedAt, b.Source.Cautions = fixedNow, []string{"Screening is not diagnosis."}
	sum, err := referral.Build(b.Source, referralSecret)
	if err != nil {
		t.Fatal(err)
	}
	r, err := f.s.IssueReferral(ctx, f.coord, db.ReferralIssue{Basis: b, Summary: sum, Format: "pdf", Paper: "a4", PDFSHA256: strings.Repeat("ab", 32)})
	if err != nil {
		t.Fatal(err)
	}
	return r
}

// fakeDraw stands for the PDF drawing: the digest of the content and paper.
func fakeDraw(sum referral.Summary, paper string) (string, error) {
	b, err := referral.Content(sum)
	if err != nil {
		return "", err
	}
	d := sha256.Sum256(append(b, paper...))
	return hex.EncodeToString(d[:]), nil
}

func TestReferralSourceIssueAndSignOff(t *testing.T) {
	f, cases := referralFixture(t)
	ctx := context.Background()
	b, err := f.s.ReferralSource(ctx, f.pids["P1"], 0)
	if err != nil {
		t.Fatal(err)
	}
	if b.CaseID != cases["P1"] || !b.ConfirmedAF() || len(b.Source.Weeks) != 2 || b.Source.Recording == nil || len(b.Source.Recording.Samples) == 0 {
		t.Fatalf("basis: case %d, AF %v, %d weeks, recording %v", b.CaseID, b.ConfirmedAF(), len(b.Source.Weeks), b.Source.Recording != nil)
	}
	if _, err := f.s.ReferralSource(ctx, f.pids["P1"], cases["P2"]); !errors.Is(err, cohort.ErrNotFound) {
		t.Errorf("another participant's case: %v, want not found", err)
	}
	b2, _ := f.s.ReferralSource(ctx, f.pids["P2"], 0)
	if b2.ConfirmedAF() || b2.Source.OverRead.Role != "adjudication" {
		t.Errorf("P2's effective over-read %+v, want the adjudication's sinus rhythm", b2.Source.OverRead)
	}

	r := issue(t, f, f.pids["P1"], 0)
	if r.CaseID != cases["P1"] || r.Code != deid.Code(referralSecret, "P1") || r.IssuedBy == "" || !r.SignedOffAt.IsZero() {
		t.Fatalf("issued %+v", r)
	}
	// Reproducible: the content as stored (jsonb) decodes to the recorded
	// digest.
	sum, err := referral.Decode(r.Content)
	if err != nil {
		t.Fatal(err)
	}
	if d, _ := referral.Digest(sum); d != r.ContentSHA256 {
		t.Errorf("stored content digests to %s, recorded %s", d, r.ContentSHA256)
	}
	if strings.Contains(string(r.Content), "P1") || strings.Contains(string(r.Content), "2026-") {
		t.Error("recorded content holds the study ID or a date")
	}

	if _, err := f.s.SignOffReferral(ctx, f.coord, r.ID, fakeDraw); !errors.Is(err, cohort.ErrForbidden) {
		t.Errorf("coordinator sign-off: %v, want forbidden", err)
	}
	signed, err := f.s.SignOffReferral(ctx, f.inv, r.ID, fakeDraw)
	if err != nil {
		t.Fatal(err)
	}
	if signed.SignedOffAt.IsZero() || !strings.Contains(signed.SignedOffBy, "investigator") {
		t.Errorf("sign-off not recorded: %+v", signed)
	}
	// The draft stays as issued; the signed content names the signer, is no
	// draft, digests to its recorded value and its PDF digest is the drawing's.
	if d, _ := referral.Decode(signed.Content); !d.Draft || d.SignOff != nil {
		t.Error("the recorded draft changed at the sign-off")
	}
	sc, err := referral.Decode(signed.SignedContent)
	if err != nil {
		t.Fatal(err)
	}
	if sc.Draft || sc.SignOff == nil || sc.SignOff.By != signed.SignedOffBy {
		t.Errorf("signed content: draft %v, sign-off %+v", sc.Draft, sc.SignOff)
	}
	if d, _ := referral.Digest(sc); d != signed.SignedContentSHA256 || d == signed.ContentSHA256 {
		t.Errorf("signed digest %s, recorded %s, draft %s", d, signed.SignedContentSHA256, signed.ContentSHA256)
	}
	if want, _ := fakeDraw(sc, "a4"); signed.SignedPDFSHA256 != want {
		t.Errorf("signed PDF digest %s, want the drawing's %s", signed.SignedPDFSHA256, want)
	}
	c := f.get(cases["P1"])
	if c.State != followup.Referred || c.OverReadAt.IsZero() || c.ClosedAt.IsZero() {
		t.Errorf("case after sign-off: %s, over-read %v, closed %v", c.State, c.OverReadAt, c.ClosedAt)
	}
	var actions []string
	rows, _ := f.s.Pool().Query(ctx, `SELECT action FROM audit_events WHERE (object_type = 'referral' AND object_id = $1) OR (object_type = 'case' AND object_id = $2) ORDER BY id`,
		itoa(r.ID), itoa(cases["P1"]))
	for rows.Next() {
		var a string
		rows.Scan(&a)
		actions = append(actions, a)
	}
	if got := strings.Join(actions, " "); !strings.Contains(got, "referral.issue case.advance case.advance referral.signoff") {
		t.Errorf("audit trail %q", got)
	}
	if _, err := f.s.SignOffReferral(ctx, f.inv, r.ID, fakeDraw); !errors.Is(err, cohort.ErrConflict) {
		t.Errorf("second sign-off: %v, want conflict", err)
	}
	again := issue(t, f, f.pids["P1"], cases["P1"])
	if _, err := f.s.SignOffReferral(ctx, f.inv, again.ID, fakeDraw); !errors.Is(err, cohort.ErrConflict) {
		t.Errorf("sign-off of a referred case: %v, want conflict", err)
	}

	var ve *cohort.ValidationError
	notAF := issue(t, f, f.pids["P2"], 0)
	if _, err := f.s.SignOffReferral(ctx, f.inv, notAF.ID, fakeDraw); !errors.As(err, &ve) {
		t.Errorf("sign-off of a summary without AF: %v, want invalid", err)
	}
	if _, err := f.s.SignOffReferral(ctx, f.inv, 999999, fakeDraw); !errors.Is(err, cohort.ErrNotFound) {
		t.Errorf("unknown referral: %v", err)
	}
	list, err := f.s.Referrals(ctx, 10)
	if err != nil || len(list) != 3 || len(list[0].Content) != 0 {
		t.Errorf("list: %d referrals, %v", len(list), err)
	}
}

// The export readers number cases within their participant and leave free
// text out.
func TestExportReaders(t *testing.T) {
	f, _ := referralFixture(t)
	ctx := context.Background()
	mustExec(t, f.s, `UPDATE cases SET note = 'free text note', closing_note = coalesce(nullif(closing_note, ''), 'x')`)
	var cases []deid.CaseRecord
	if err := f.s.EachExportCase(ctx, func(r deid.CaseRecord) error { cases = append(cases, r); return nil }); err != nil {
		t.Fatal(err)
	}
	if len(cases) != 3 || cases[0].Number != 1 || cases[0].StudyID != "P1" || cases[0].FlaggedAt.IsZero() {
		t.Fatalf("cases %+v", cases)
	}
	var reads []deid.OverReadRecord
	if err := f.s.EachExportOverRead(ctx, func(r deid.OverReadRecord) error { reads = append(reads, r); return nil }); err != nil {
		t.Fatal(err)
	}
	if len(reads) != 5 || reads[0].CaseNumber != 1 || reads[0].RecordingNumber != 1 || reads[0].ReadOn != (cohort.Date{Year: 2026, Month: 5, Day: 29}) {
		t.Fatalf("over-reads %+v", reads)
	}
	var screens, parts int
	if err := f.s.EachExportScreen(ctx, func(deid.ScreenRecord) error { screens++; return nil }); err != nil {
		t.Fatal(err)
	}
	if err := f.s.EachExportParticipant(ctx, func(deid.ParticipantRecord) error { parts++; return nil }); err != nil {
		t.Fatal(err)
	}
	if screens != 6 || parts != 3 {
		t.Errorf("%d screen results, %d participants; want 6 and 3", screens, parts)
	}
	e, err := f.s.RecordExport(ctx, f.inv, db.Export{Kind: db.ExportDataset, FileName: "x.zip", Bytes: 10, SHA256: strings.Repeat("0", 64), Manifest: []byte(`{"files":[]}`)})
	if err != nil || e.ID == 0 {
		t.Fatalf("record export: %+v %v", e, err)
	}
	if _, err := f.s.RecordExport(ctx, f.inv, db.Export{Kind: "nightly"}); err == nil {
		t.Error("an unknown export kind was recorded")
	}
	list, err := f.s.Exports(ctx, 5)
	if err != nil || len(list) != 1 || list[0].Actor == "" {
		t.Errorf("exports %+v %v", list, err)
	}
}

// Two readers who disagree, with nobody adjudicating yet, settle nothing
// (overread.Resolve): the case is not ready to refer, its summary reports no
// AF over-read, and a summary issued while the first reading stood alone
// cannot be signed off once the second reader disagrees.
func TestDisputedReadingIsNotAReferral(t *testing.T) {
	f, cases := referralFixture(t)
	ctx := context.Background()
	early := issue(t, f, f.pids["P1"], cases["P1"]) // P1's first reader said AF, alone
	if sum, err := referral.Decode(early.Content); err != nil || sum.OverRead == nil || sum.OverRead.Rhythm != "af" {
		t.Fatalf("summary before the dispute: %+v, %v; want the first reader's AF", sum.OverRead, err)
	}
	mustExec(t, f.s, `INSERT INTO over_reads (recording_id, case_id, participant_id, role, rhythm, reader, read_on)
		SELECT id, case_id, participant_id, 'second', 'sinus', 'Reader Two', date '2026-05-30' FROM recordings WHERE case_id = $1`, cases["P1"])

	ready, err := f.s.ReadyToRefer(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if len(ready) != 0 {
		t.Errorf("ready %+v, want none: P1's readers disagree, P2 was adjudicated sinus, P3 is closed", ready)
	}
	b, err := f.s.ReferralSource(ctx, f.pids["P1"], cases["P1"])
	if err != nil {
		t.Fatal(err)
	}
	if b.ConfirmedAF() || b.Source.OverRead != nil {
		t.Errorf("disputed basis: confirmed %v, over-read %+v; want no over-read on the summary", b.ConfirmedAF(), b.Source.OverRead)
	}
	late := issue(t, f, f.pids["P1"], cases["P1"])
	if sum, err := referral.Decode(late.Content); err != nil || sum.OverRead != nil {
		t.Errorf("summary after the dispute reports over-read %+v (%v); want none", sum.OverRead, err)
	}
	var ve *cohort.ValidationError
	for _, r := range []db.Referral{early, late} {
		if _, err := f.s.SignOffReferral(ctx, f.inv, r.ID, fakeDraw); !errors.As(err, &ve) {
			t.Errorf("sign-off of summary %d of a disputed case: %v, want refused", r.ID, err)
		}
	}
	if c := f.get(cases["P1"]); c.State != followup.RecordingReceived {
		t.Errorf("disputed case moved to %s", c.State)
	}
}

// A recording under 30 s read as AF confirms nothing (the diagnostic-recording
// rule, as the cascade counts it): its case is not ready to refer and its
// summary cannot be signed off.
func TestShortRecordingIsNotAReferral(t *testing.T) {
	f, cases := referralFixture(t)
	ctx := context.Background()
	mustExec(t, f.s, `UPDATE recordings SET too_short = true, duration_s = 20 WHERE case_id = $1`, cases["P1"])
	ready, err := f.s.ReadyToRefer(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if len(ready) != 0 {
		t.Errorf("ready %+v, want none: P1's only recording is too short", ready)
	}
	b, err := f.s.ReferralSource(ctx, f.pids["P1"], cases["P1"])
	if err != nil {
		t.Fatal(err)
	}
	if b.ConfirmedAF() {
		t.Errorf("a short recording's AF reading confirmed the basis: %+v", b.Source.OverRead)
	}
	r := issue(t, f, f.pids["P1"], cases["P1"])
	var ve *cohort.ValidationError
	if _, err := f.s.SignOffReferral(ctx, f.inv, r.ID, fakeDraw); !errors.As(err, &ve) {
		t.Errorf("sign-off on a short recording: %v, want refused", err)
	}
	if c := f.get(cases["P1"]); c.State != followup.RecordingReceived {
		t.Errorf("case moved to %s on a short recording", c.State)
	}
}
