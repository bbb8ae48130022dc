package db

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"slices"
	"strconv"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
	"cohortdesk/cohort/overread"
	"cohortdesk/cohort/referral"
	"cohortdesk/cohort/risk"

	"github.com/jackc/pgx/v5"
)

// concluded is a recording with what its readings settle on
// (overread.Resolve), as the referral reads rank and check it.
type concluded struct {
	ID, CaseID int64
	TakenAt    time.Time
	TooShort   bool
	Readings   []OverRead
	Conclusion overread.Conclusion
}

// confirmsAF applies overread's confirmed-AF rule to the recording.
func (c concluded) confirmsAF() bool { return c.Conclusion.ConfirmsAF(c.TooShort) }

// reported is the reading a summary names for the conclusion: the
// adjudication of an adjudicated recording, else the first reading (alone,
// or agreed with by the second).
func (c concluded) reported() (OverRead, bool) {
	want := overread.First
	if c.Conclusion.Status == overread.Adjudicated {
		want = overread.Adjudication
	}
	for _, o := range c.Readings {
		if o.Role == want {
			return o, c.Conclusion.Final
		}
	}
	return OverRead{}, false
}

// concludedRecordings reads the recordings that match where (on alias r)
// and have readings, and resolves each one's readings
// with overread.Resolve: the conclusion is never decided in SQL.
func concludedRecordings(ctx context.Context, q querier, where string, args ...any) ([]concluded, error) {
	rows, err := q.Query(ctx, `SELECT r.id, r.case_id, r.taken_at, r.too_short FROM recordings r
		WHERE `+where+` AND EXISTS (SELECT 1 FROM over_reads o WHERE o.recording_id = r.id)
		ORDER BY r.id`, args...)
	if err != nil {
		return nil, err
	}
	out, err := pgx.CollectRows(rows, func(r pgx.CollectableRow) (concluded, error) {
		var c concluded
		err := r.Scan(&c.ID, &c.CaseID, &c.TakenAt, &c.TooShort)
		return c, err
	})
	if err != nil {
		return nil, err
	}
	ids := make([]int64, len(out))
	for i, c := range out {
		ids[i] = c.ID
	}
	by, err := readingsOf(ctx, q, ids)
	if err != nil {
		return nil, err
	}
	for i := range out {
		c := &out[i]
		c.Readings = by[c.ID]
		if c.Conclusion, err = conclusionOf(c.ID, c.Readings); err != nil {
			return nil, err
		}
	}
	return out, nil
}

// ReferralBasis is what a referral summary is built from: the source for
// referral.Build and the records it belongs to.
type ReferralBasis struct {
	ParticipantID int64
	StudyID       string
	CaseID        int64          // 0 for a participant without a case
	CaseState     followup.State // "" without a case
	ProtocolID    int            // 0 when no protocol applies
	// Withdrawal is set when the participant has left the study: a summary
	// is then issued only with the issuer's confirmation (referral.CheckIssue).
	Withdrawal *referral.Withdrawal
	Source     referral.Source
	// Confirmed: the summary's recording confirms AF
	// (overread.Conclusion.ConfirmsAF).
	Confirmed bool
}

// ConfirmedAF reports whether the summary's recording confirms atrial
// fibrillation (overread.Conclusion.ConfirmsAF): only such a summary can be
// signed off.
func (b ReferralBasis) ConfirmedAF() bool {
	return b.Confirmed && b.Source.OverRead != nil && b.Source.OverRead.Rhythm == overread.AF
}

// ReferralSource gathers a summary's source for a participant: for one of
// their cases when caseID is set (a case of another participant is not
// found), else for their latest case, else for the participant alone (the
// screen-positive weeks under the active protocol and their latest
// over-read). The birth date is read to compute the age band and goes no
// further; the summary's issue is what gets audited. Cautions and the issue
// time are the caller's.
func (s *Store) ReferralSource(ctx context.Context, participantID, caseID int64) (ReferralBasis, error) {
	p, err := s.Participant(ctx, participantID)
	if err != nil {
		return ReferralBasis{}, err
	}
	b := ReferralBasis{ParticipantID: p.ID, StudyID: p.StudyID, Withdrawal: referral.WithdrawalOf(p.EnrolledOn, p.WithdrawnOn, p.ConsentVersion)}
	src := &b.Source
	src.StudyID, src.EnrolledOn, src.Location, src.Sex = p.StudyID, p.EnrolledOn, p.Location(), p.Sex
	src.AgeAtEnrolment = p.AgeAtEnrolment
	src.Intake = risk.Intake{HeartFailure: answerOf(p.Risk.HeartFailure), Hypertension: answerOf(p.Risk.Hypertension),
		Diabetes: answerOf(p.Risk.Diabetes), StrokeTIA: answerOf(p.Risk.PriorStroke), Vascular: answerOf(p.Risk.VascularDisease)}

	var birth *time.Time
	err = s.pool.QueryRow(ctx, `SELECT birth_date FROM participant_identity WHERE participant_id = $1`, p.ID).Scan(&birth)
	if err != nil && !errors.Is(err, pgx.ErrNoRows) {
		return b, mapErr("referral birth date", err)
	}
	if birth != nil {
		d := cohort.DateOf(*birth)
		src.BirthDate = &d
	}

	if caseID == 0 {
		err := s.pool.QueryRow(ctx, `SELECT id FROM cases WHERE participant_id = $1 ORDER BY flagged_at DESC, id DESC LIMIT 1`, p.ID).Scan(&caseID)
		if err != nil && !errors.Is(err, pgx.ErrNoRows) {
			return b, mapErr("referral latest case", err)
		}
	}
	if caseID != 0 {
		c, err := s.Case(ctx, caseID)
		if err != nil {
			return b, err
		}
		if c.ParticipantID != p.ID {
			return b, fmt.Errorf("db: referral: case %d is not participant %d's: %w", caseID, p.ID, cohort.ErrNotFound)
		}
		b.CaseID, b.CaseState, b.ProtocolID = c.ID, c.State, c.ProtocolID
	} else {
		err := s.pool.QueryRow(ctx, `SELECT id FROM protocols WHERE active`).Scan(&b.ProtocolID)
		if err != nil && !errors.Is(err, pgx.ErrNoRows) {
			return b, mapErr("referral protocol", err)
		}
	}

	if b.ProtocolID != 0 {
		var raw []byte
		pr := &src.Protocol
		if err := s.pool.QueryRow(ctx, `SELECT id, name, version, params FROM protocols WHERE id = $1`, b.ProtocolID).
			Scan(&pr.ID, &pr.Name, &pr.Version, &raw); err != nil {
			return b, mapErr("referral protocol", err)
		}
		pr.ParamsOK = json.Unmarshal(raw, &pr.Params) == nil && pr.Params.Validate() == nil
	}

	var rows pgx.Rows
	if b.CaseID != 0 {
		rows, err = s.pool.Query(ctx, `
			SELECT sr.week, sr.verdict, sr.reason, sr.wear_hours, sr.result
			FROM case_weeks cw JOIN screen_results sr
			  ON sr.participant_id = cw.participant_id AND sr.protocol_id = cw.protocol_id AND sr.week = cw.week
			WHERE cw.case_id = $1 ORDER BY sr.week`, b.CaseID)
	} else {
		rows, err = s.pool.Query(ctx, `
			SELECT week, verdict, reason, wear_hours, result FROM screen_results
			WHERE participant_id = $1 AND protocol_id = $2 AND verdict = 'positive' ORDER BY week`, p.ID, b.ProtocolID)
	}
	if err != nil {
		return b, mapErr("referral weeks", err)
	}
	src.Weeks, err = pgx.CollectRows(rows, func(r pgx.CollectableRow) (referral.Week, error) {
		var w referral.Week
		var week int16
		var hours float32
		var raw []byte
		if err := r.Scan(&week, &w.Verdict, &w.Reason, &hours, &raw); err != nil {
			return w, err
		}
		w.Week, w.WearHours = int(week), float64(hours)
		_ = json.Unmarshal(raw, &w.Result) // a result of another shape shows without figures
		return w, nil
	})
	if err != nil {
		return b, mapErr("referral weeks", err)
	}
	if i := referral.MostIrregular(src.Weeks); i >= 0 {
		w, err := s.WearWeek(ctx, p, src.Weeks[i].Week)
		if err != nil {
			return b, err
		}
		if len(w.HR.T) > 0 {
			src.HeartRate = &w
		}
	}

	if err := s.referralRecording(ctx, &b); err != nil {
		return b, err
	}
	if err := s.pool.QueryRow(ctx, `SELECT contact_route FROM study WHERE id = 1`).Scan(&src.ContactRoute); err != nil && !errors.Is(err, pgx.ErrNoRows) {
		return b, mapErr("referral contact route", err)
	}
	return b, nil
}

// referralRecording picks the recording the summary reports, of the case
// (else of the participant), among those whose readings settle a rhythm
// (overread.Resolve; two readers who disagree settle nothing): the latest one
// that confirms AF, else the latest diagnostic one, else the latest settled
// one.
func (s *Store) referralRecording(ctx context.Context, b *ReferralBasis) error {
	where, arg := "r.case_id = $1", b.CaseID
	if b.CaseID == 0 {
		where, arg = "r.participant_id = $1", b.ParticipantID
	}
	recs, err := concludedRecordings(ctx, s.pool, where, arg)
	if err != nil {
		return mapErr("referral recording", err)
	}
	rank := func(c concluded) int {
		switch {
		case c.confirmsAF():
			return 0
		case c.Conclusion.Diagnostic(c.TooShort):
			return 1
		}
		return 2
	}
	var best *concluded
	for i := range recs {
		c := &recs[i]
		if _, ok := c.reported(); !ok {
			continue
		}
		if best == nil || rank(*c) < rank(*best) || rank(*c) == rank(*best) && laterConclusion(*c, *best) {
			best = c
		}
	}
	if best == nil {
		return nil
	}
	var rec referral.Recording
	var hz *float32
	var dur float32
	var samples []byte
	var beats []int32
	var auto string
	err = s.pool.QueryRow(ctx, `SELECT taken_at, duration_s, auto_interpretation, sampling_hz, samples, beats FROM recordings WHERE id = $1`, best.ID).
		Scan(&rec.TakenAt, &dur, &auto, &hz, &samples, &beats)
	if err != nil {
		return mapErr("referral recording", err)
	}
	rec.DurationS, rec.Auto = float64(dur), overread.Auto(auto)
	if hz != nil && len(samples) > 0 {
		mv, err := DecodeSamples(samples)
		if err != nil {
			return err
		}
		rec.RateHz, rec.Samples = float64(*hz), mv
		for _, bt := range beats {
			rec.Beats = append(rec.Beats, int(bt))
		}
	}
	r, _ := best.reported()
	b.Source.Recording = &rec
	b.Source.OverRead = &referral.OverRead{Role: r.Role, Rhythm: best.Conclusion.Rhythm, Confidence: r.Confidence, ReadOn: r.On}
	b.Confirmed = best.confirmsAF()
	return nil
}

// laterConclusion orders recordings of one rank: the later settled day, then
// the later recording.
func laterConclusion(a, b concluded) bool {
	if a.Conclusion.SettledOn != b.Conclusion.SettledOn {
		return b.Conclusion.SettledOn.Before(a.Conclusion.SettledOn)
	}
	if !a.TakenAt.Equal(b.TakenAt) {
		return a.TakenAt.After(b.TakenAt)
	}
	return a.ID > b.ID
}

func answerOf(b *bool) risk.Answer {
	switch {
	case b == nil:
		return risk.Unknown
	case *b:
		return risk.Yes
	}
	return risk.No
}

// Referral is an issued summary as recorded. Zero SignedOffAt: not signed
// off yet.
type Referral struct {
	ID            int64
	ParticipantID int64
	StudyID       string
	CaseID        int64 // 0: made on request without a case
	ProtocolID    int
	Code          string
	Content       []byte // the summary's JSON as stored (empty in lists)
	ContentSHA256 string
	Format        string
	Paper         string
	PDFSHA256     string
	IssuedBy      string
	IssuedAt      time.Time
	SignedOffBy   string
	SignedOffAt   time.Time
	// The content signed off (cohort/referral.Sign) with its digests; empty
	// for a draft and for a summary signed off before drafts existed.
	SignedContent       []byte // empty in lists
	SignedContentSHA256 string
	SignedPDFSHA256     string
}

// ReferralIssue is a summary to record as issued.
type ReferralIssue struct {
	Basis     ReferralBasis
	Summary   referral.Summary
	Format    string // html, pdf or zip
	Paper     string // a4 or letter
	PDFSHA256 string // digest of the PDF made from Summary on Paper
	// ConfirmedWithdrawn is the issuer's confirmation that a summary of a
	// withdrawn participant may still be passed on (referral.CheckIssue).
	ConfirmedWithdrawn bool
}

// Referral formats and papers as stored.
var (
	referralFormats = map[string]bool{"html": true, "pdf": true, "zip": true}
	referralPapers  = map[string]bool{"a4": true, "letter": true}
)

// IssueReferral records an issued summary (who, when, which participant,
// case and protocol version, the content and its digest) and audits it.
func (s *Store) IssueReferral(ctx context.Context, a cohort.Actor, in ReferralIssue) (Referral, error) {
	if !referralFormats[in.Format] || !referralPapers[in.Paper] || len(in.PDFSHA256) != 64 {
		return Referral{}, fmt.Errorf("db: issue referral: format %q, paper %q, pdf digest %q: not a recordable summary", in.Format, in.Paper, in.PDFSHA256)
	}
	if err := referral.CheckIssue(in.Basis.Withdrawal, in.ConfirmedWithdrawn); err != nil {
		return Referral{}, err
	}
	content, err := referral.Content(in.Summary)
	if err != nil {
		return Referral{}, err
	}
	digest, err := referral.Digest(in.Summary)
	if err != nil {
		return Referral{}, err
	}
	r := Referral{ParticipantID: in.Basis.ParticipantID, StudyID: in.Basis.StudyID, CaseID: in.Basis.CaseID, ProtocolID: in.Basis.ProtocolID,
		Code: in.Summary.ReferralCode, Content: content, ContentSHA256: digest, Format: in.Format, Paper: in.Paper, PDFSHA256: in.PDFSHA256,
		IssuedBy: a.Label()}
	err = s.inTx(ctx, func(tx pgx.Tx) error {
		if err := tx.QueryRow(ctx, `
			INSERT INTO referrals (participant_id, case_id, referral_code, protocol_id, content, content_sha256, format, paper, pdf_sha256,
			                       issued_by_id, issued_by, issued_at)
			VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11, $12) RETURNING id`,
			r.ParticipantID, nullID(r.CaseID), r.Code, nullInt(r.ProtocolID), content, digest, r.Format, r.Paper, r.PDFSHA256,
			actorID(a), r.IssuedBy, s.now()).Scan(&r.ID); err != nil {
			return err
		}
		return audit(ctx, tx, a, "referral.issue", "referral", strconv.FormatInt(r.ID, 10), nil, map[string]any{
			"participant_id": r.ParticipantID, "case_id": r.CaseID, "protocol_id": r.ProtocolID, "referral_code": r.Code,
			"content_sha256": digest, "pdf_sha256": r.PDFSHA256, "format": r.Format, "paper": r.Paper,
			"withdrawn_confirmed": in.Basis.Withdrawal != nil})
	})
	if err != nil {
		return Referral{}, mapErr("issue referral", err)
	}
	return s.Referral(ctx, r.ID)
}

func nullID(id int64) any {
	if id == 0 {
		return nil
	}
	return id
}

func nullInt(n int) any {
	if n == 0 {
		return nil
	}
	return n
}

func actorID(a cohort.Actor) any {
	if a.UserID == 0 {
		return nil
	}
	return a.UserID
}

const referralCols = `f.id, f.participant_id, p.study_id, coalesce(f.case_id, 0), coalesce(f.protocol_id, 0), f.referral_code,
	f.content_sha256, f.format, f.paper, f.pdf_sha256, f.issued_by, f.issued_at, f.signed_off_by, f.signed_off_at,
	coalesce(f.signed_content_sha256, ''), coalesce(f.signed_pdf_sha256, '')`

func scanReferral(row pgx.Row, extra ...any) (Referral, error) {
	var r Referral
	var signed *time.Time
	dest := []any{&r.ID, &r.ParticipantID, &r.StudyID, &r.CaseID, &r.ProtocolID, &r.Code, &r.ContentSHA256, &r.Format, &r.Paper,
		&r.PDFSHA256, &r.IssuedBy, &r.IssuedAt, &r.SignedOffBy, &signed, &r.SignedContentSHA256, &r.SignedPDFSHA256}
	err := row.Scan(append(dest, extra...)...)
	r.SignedOffAt = timeOf(signed)
	return r, err
}

// Referral returns one issued summary with its content.
func (s *Store) Referral(ctx context.Context, id int64) (Referral, error) {
	var content, signedContent []byte
	r, err := scanReferral(s.reader(ctx).QueryRow(ctx, `SELECT `+referralCols+`, f.content, f.signed_content
		FROM referrals f JOIN participants p ON p.id = f.participant_id WHERE f.id = $1`, id), &content, &signedContent)
	r.Content, r.SignedContent = content, signedContent
	return r, mapErr("referral", err)
}

// Referrals lists issued summaries, newest first, without their content.
func (s *Store) Referrals(ctx context.Context, limit int) ([]Referral, error) {
	if limit <= 0 || limit > 1000 {
		limit = 100
	}
	rows, err := s.reader(ctx).Query(ctx, `SELECT `+referralCols+`
		FROM referrals f JOIN participants p ON p.id = f.participant_id ORDER BY f.issued_at DESC, f.id DESC LIMIT $1`, limit)
	if err != nil {
		return nil, mapErr("referrals", err)
	}
	out, err := pgx.CollectRows(rows, func(r pgx.CollectableRow) (Referral, error) { return scanReferral(r) })
	return out, mapErr("referrals", err)
}

// ReferralCounts counts the summaries issued and those signed off; each
// signed-off summary of a case referred that case (one per case).
func (s *Store) ReferralCounts(ctx context.Context) (issued, signed int, err error) {
	err = s.pool.QueryRow(ctx, `SELECT count(*), count(*) FILTER (WHERE signed_off_at IS NOT NULL AND case_id IS NOT NULL) FROM referrals`).
		Scan(&issued, &signed)
	return issued, signed, mapErr("referral counts", err)
}

// ReadyCase is a case ready to refer.
type ReadyCase struct {
	CaseID        int64
	ParticipantID int64
	StudyID       string
	State         followup.State
	FirstWeek     int
	LastWeek      int
}

// ReadyToRefer lists the cases still being worked that have a recording
// confirming atrial fibrillation (overread.Conclusion.ConfirmsAF): their
// summaries are due. A case is referred when an investigator signs its
// summary off.
func (s *Store) ReadyToRefer(ctx context.Context) ([]ReadyCase, error) {
	var out []ReadyCase
	err := s.readTx(ctx, func(tx pgx.Tx) error {
		recs, err := concludedRecordings(ctx, tx, "r.case_id IN (SELECT id FROM cases WHERE closed_at IS NULL)")
		if err != nil {
			return err
		}
		var ids []int64
		for _, c := range recs {
			if c.confirmsAF() && !slices.Contains(ids, c.CaseID) {
				ids = append(ids, c.CaseID)
			}
		}
		rows, err := tx.Query(ctx, `
			SELECT c.id, c.participant_id, p.study_id, c.state, c.first_week, c.last_week
			FROM cases c JOIN participants p ON p.id = c.participant_id
			WHERE c.id = ANY($1) AND c.closed_at IS NULL
			ORDER BY c.id`, ids)
		if err != nil {
			return err
		}
		out, err = pgx.CollectRows(rows, func(r pgx.CollectableRow) (ReadyCase, error) {
			var c ReadyCase
			var st string
			var fw, lw int16
			err := r.Scan(&c.CaseID, &c.ParticipantID, &c.StudyID, &st, &fw, &lw)
			c.State, c.FirstWeek, c.LastWeek = followup.State(st), int(fw), int(lw)
			return c, err
		})
		return err
	})
	return out, mapErr("ready to refer", err)
}
