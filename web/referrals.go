package web

import (
	"archive/zip"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"maps"
	"net/http"
	"net/url"
	"slices"
	"strconv"
	"strings"

	"cohortdesk/cohort"
	"cohortdesk/cohort/deid"
	"cohortdesk/cohort/followup"
	"cohortdesk/cohort/overread"
	"cohortdesk/cohort/referral"
	"cohortdesk/db"
	"cohortdesk/views"
	"cohortdesk/views/referralpdf"
	"cohortdesk/web/referralissue"
)

// referralStore is what referral summaries need from the database.
type referralStore interface {
	referralissue.Store // the source of a summary and its record
	Referral(ctx context.Context, id int64) (db.Referral, error)
	Referrals(ctx context.Context, limit int) ([]db.Referral, error)
	ReferralCounts(ctx context.Context) (issued, signed int, err error)
	ReadyToRefer(ctx context.Context) ([]db.ReadyCase, error)
	referralissue.Signer // the sign-off
	ParticipantByStudyID(ctx context.Context, studyID string) (db.Participant, error)
	RecordExport(ctx context.Context, a cohort.Actor, e db.Export) (db.Export, error)
}

// errNoSecret answers summaries and exports on a server started without the
// deployment secret: codes made with another secret would not match.
var errNoSecret = &cohort.PublicError{
	Message: "Referral codes cannot be made: the server was started without its deployment secret (COHORTDESK_SECRET). Nothing was issued or exported.",
	Kind:    db.ErrUnavailable,
}

// codeSecret is the deployment secret, or errNoSecret.
func (s *Server) codeSecret() ([]byte, error) {
	if deid.CheckSecret(s.secret) != nil {
		return nil, errNoSecret
	}
	return s.secret, nil
}

// draft builds a participant's summary as it would be issued now.
func (s *Server) draft(ctx context.Context, pid, caseID int64) (referralissue.Draft, error) {
	secret, err := s.codeSecret()
	if err != nil {
		return referralissue.Draft{}, err
	}
	return referralissue.Prepare(ctx, s.store, pid, caseID, secret, s.now())
}

// caseQuery reads an optional case id; anything but a positive number is
// not found.
func caseQuery(v string) (int64, error) {
	if v == "" || v == "0" {
		return 0, nil
	}
	id, err := strconv.ParseInt(v, 10, 64)
	if err != nil || id <= 0 {
		return 0, errNotFound
	}
	return id, nil
}

// referralPreview shows the summary as it would be issued now. It is marked
// as a preview in print too: only an issued (recorded) summary may be sent.
func (s *Server) referralPreview(w http.ResponseWriter, r *http.Request) error {
	pid, err := idParam(r)
	if err != nil {
		return err
	}
	q := readQuery(r.URL.Query())
	caseID, paper := int64(0), paperParam(q, s.studyPaper(r.Context()))
	if q.get("case") != "0" { // 0: the participant alone, as the page's own links say
		caseID = q.id("case", "case number")
	}
	if err := q.err(); err != nil {
		return err
	}
	d, err := s.draft(r.Context(), pid, caseID)
	if err != nil {
		return err
	}
	return s.renderPreview(w, r, http.StatusOK, pid, d, paper, nil, "")
}

// renderPreview shows a draft with its issue form: with the warning when the
// participant has withdrawn, and with the refusal of an issue when there is
// one.
func (s *Server) renderPreview(w http.ResponseWriter, r *http.Request, status int, pid int64, d referralissue.Draft, paper string, errs map[string]string, msg string) error {
	b, sum := d.Basis, d.Summary
	base := fmt.Sprintf("/participants/%d/referral?case=%d&paper=", pid, b.CaseID)
	m := s.referralModel(r, sum, paper, base)
	m.Page.Title = "Referral summary (preview)"
	m.Preview, m.IssueAction, m.CaseID = true, fmt.Sprintf("/participants/%d/referral", pid), b.CaseID
	m.Errors, m.Message = errs, msg
	if b.Withdrawal != nil {
		m.Withdrawn = b.Withdrawal.Warning()
	}
	if b.CaseID != 0 {
		m.CaseHref = fmt.Sprintf("/cases/%d", b.CaseID)
	}
	s.render(w, r, status, views.Referral(m))
	return nil
}

// referralIssue builds the summary, makes its PDF, records both digests and
// the content, and shows the issued summary (or sends its PDF). A summary of
// a withdrawn participant needs the issuer's confirmation; without it the
// preview comes back with the warning and nothing is recorded.
func (s *Server) referralIssue(w http.ResponseWriter, r *http.Request) error {
	pid, err := idParam(r)
	if err != nil {
		return err
	}
	if err := r.ParseForm(); err != nil {
		return err
	}
	caseID, err := caseQuery(r.PostForm.Get("case"))
	if err != nil {
		return err
	}
	// An issued summary is a draft until an investigator signs it off, so
	// issuing leads to its record, where the sign-off is (for investigators)
	// and from where it prints. It is recorded as shown in the print view
	// unless a PDF was asked for.
	format := r.PostForm.Get("format")
	if format != "pdf" {
		format = "html"
	}
	paper := paperOf(r.PostForm.Get("paper"), s.studyPaper(r.Context()))
	d, err := s.draft(r.Context(), pid, caseID)
	if err != nil {
		return err
	}
	d.ConfirmedWithdrawn = r.PostForm.Get(referral.ConfirmWithdrawnField) == "yes"
	ref, _, err := referralissue.Record(r.Context(), s.store, s.actor(r), d, format, paper)
	if err != nil {
		f, ok := refused(r, err, nil)
		if !ok {
			return err
		}
		return s.renderPreview(w, r, f.Status, pid, d, paper, f.Fields, f.Message)
	}
	http.Redirect(w, r, fmt.Sprintf("/referrals/%d?done=issued", ref.ID), http.StatusSeeOther)
	return nil
}

// issue builds, draws and records one summary (referralissue) without the
// confirmation a withdrawn participant needs; it returns the record and the
// PDF.
func (s *Server) issue(ctx context.Context, a cohort.Actor, pid, caseID int64, format, paper string) (db.Referral, []byte, error) {
	d, err := s.draft(ctx, pid, caseID)
	if err != nil {
		return db.Referral{}, nil, err
	}
	return referralissue.Record(ctx, s.store, a, d, format, paper)
}

// recorded reads an issued summary back as it now stands (the signed
// content once signed off, else the content as issued), with whether that
// content still digests to its recorded value, and the digest its PDF must
// have.
func (s *Server) recorded(r *http.Request) (db.Referral, referral.Summary, bool, error) {
	id, err := idParam(r)
	if err != nil {
		return db.Referral{}, referral.Summary{}, false, err
	}
	ref, err := s.store.Referral(r.Context(), id)
	if err != nil {
		return ref, referral.Summary{}, false, err
	}
	content, digest := currentContent(ref)
	sum, err := referral.Decode(content)
	if err != nil {
		return ref, sum, false, err
	}
	d, err := referral.Digest(sum)
	return ref, sum, err == nil && d == digest, err
}

// currentContent is a record's content as it now stands and its recorded
// digest: the signed content once signed off (summaries signed off before
// drafts existed have none, and keep their content as issued).
func currentContent(ref db.Referral) ([]byte, string) {
	if len(ref.SignedContent) > 0 {
		return ref.SignedContent, ref.SignedContentSHA256
	}
	return ref.Content, ref.ContentSHA256
}

// currentPDFDigest is the digest the record's PDF must have.
func currentPDFDigest(ref db.Referral) string {
	if ref.SignedPDFSHA256 != "" {
		return ref.SignedPDFSHA256
	}
	return ref.PDFSHA256
}

// referralShow shows an issued summary drawn from its recorded content.
func (s *Server) referralShow(w http.ResponseWriter, r *http.Request) error {
	return s.renderRecorded(w, r, http.StatusOK, nil, "")
}

func (s *Server) renderRecorded(w http.ResponseWriter, r *http.Request, status int, errs map[string]string, msg string) error {
	ref, sum, ok, err := s.recorded(r)
	if err != nil {
		return err
	}
	q := readQuery(r.URL.Query())
	paper := paperParam(q, ref.Paper)
	q.oneOf("done", slices.Collect(maps.Keys(referralDone))...)
	if err := q.err(); err != nil {
		return err
	}
	m := s.referralModel(r, sum, paper, fmt.Sprintf("/referrals/%d?paper=", ref.ID))
	m.Page.Title = "Referral summary " + sum.ReferralCode
	m.PDFHref = fmt.Sprintf("/referrals/%d/pdf?paper=%s", ref.ID, paper)
	m.Errors, m.Message = errs, msg
	if msg == "" {
		m.Page.Flash = referralDone[r.URL.Query().Get("done")]
	}
	_, digest := currentContent(ref)
	rec := &views.ReferralRecordView{ID: ref.ID, IssuedBy: ref.IssuedBy, IssuedAt: when(ref.IssuedAt, s.studyZone(r.Context())),
		Format: ref.Format, Paper: paperLabel(ref.Paper), Digest: digest, DigestOK: ok, PDFDigest: currentPDFDigest(ref),
		Draft: sum.Status() == referral.Drafted}
	if len(ref.SignedContent) > 0 {
		rec.DraftDigest, rec.DraftPDFDigest = ref.ContentSHA256, ref.PDFSHA256
	}
	if ref.CaseID != 0 {
		rec.CaseHref = fmt.Sprintf("/cases/%d", ref.CaseID)
		m.CaseHref = rec.CaseHref
	}
	if !ref.SignedOffAt.IsZero() {
		rec.SignedOff = "by " + ref.SignedOffBy + " on " + when(ref.SignedOffAt, s.studyZone(r.Context()))
	}
	signs := followup.StepSignOff.By(role(r))
	if !signs && rec.SignedOff == "" && ref.CaseID != 0 {
		rec.SignOffNote = "An investigator signs this summary off on this page; it is not sent before."
	}
	if signs && rec.SignedOff == "" {
		switch {
		case ref.CaseID == 0:
			rec.SignOffNote = "Made on request without a case: there is no case to refer."
		case sum.OverRead == nil || sum.OverRead.Rhythm != overread.AF:
			rec.SignOffNote = "The over-read in this summary does not confirm atrial fibrillation, so it cannot be signed off as a referral."
		case !ok:
			rec.SignOffNote = "The recorded content no longer matches its digest; issue a new summary."
		default:
			rec.CanSignOff = true
		}
	}
	m.Record = rec
	s.render(w, r, status, views.Referral(m))
	return nil
}

// referralDone words what the last step on a summary did.
var referralDone = map[string]string{
	"issued":  "Summary issued as a draft. It is sent once an investigator has signed it off.",
	"signoff": "Signed off; the case is now referred. The summary now names you as its signer.",
}

func paperLabel(p string) string {
	if p == paperLetter {
		return "US Letter"
	}
	return "A4"
}

// referralPDF sends an issued summary's PDF, drawn again from the recorded
// content; on the recorded paper it is byte for byte the PDF issued.
func (s *Server) referralPDFFile(w http.ResponseWriter, r *http.Request) error {
	ref, sum, ok, err := s.recorded(r)
	if err != nil {
		return err
	}
	if !ok {
		return &cohort.PublicError{Message: "The recorded content of this summary no longer matches its digest; it is not sent.", Kind: cohort.ErrConflict}
	}
	name := "referral-" + sum.ReferralCode
	if sum.Draft {
		name += "-draft"
	}
	q := readQuery(r.URL.Query())
	paper := paperParam(q, ref.Paper)
	if err := q.err(); err != nil {
		return err
	}
	pdf, err := referralPDF(sum, paper)
	if err != nil {
		return err
	}
	w.Header().Set("Content-Type", "application/pdf")
	w.Header().Set("Content-Disposition", fmt.Sprintf(`inline; filename="%s.pdf"`, name))
	w.Header().Set("Cache-Control", "no-store")
	w.Header().Set("X-Content-SHA256", sha256Hex(pdf))
	_, err = w.Write(pdf)
	return err
}

// referralSignOff records an investigator's sign-off, which moves the case
// to referred.
func (s *Server) referralSignOff(w http.ResponseWriter, r *http.Request) error {
	id, err := idParam(r)
	if err != nil {
		return err
	}
	if err := r.ParseForm(); err != nil {
		return err
	}
	if r.PostForm.Get("reviewed") != "yes" {
		if _, err := s.store.Referral(r.Context(), id); err != nil {
			return err
		}
		msg := "confirm that you have reviewed the summary"
		return s.renderRecorded(w, r, http.StatusUnprocessableEntity, map[string]string{"reviewed": msg}, "Please "+msg+".")
	}
	if _, err := referralissue.SignOff(r.Context(), s.store, s.actor(r), id); err != nil {
		f, ok := refused(r, err, nil)
		if !ok {
			return err
		}
		return s.renderRecorded(w, r, f.Status, nil, f.Message)
	}
	http.Redirect(w, r, fmt.Sprintf("/referrals/%d?done=signoff", id), http.StatusSeeOther)
	return nil
}

// referralFind opens the summary preview of a participant named by study
// ID, for summaries on request.
func (s *Server) referralFind(w http.ResponseWriter, r *http.Request) error {
	q := readQuery(r.URL.Query())
	sid := q.text("study_id")
	if err := q.err(); err != nil {
		return err
	}
	p, err := s.store.ParticipantByStudyID(r.Context(), sid)
	if err != nil {
		if !errors.Is(err, cohort.ErrNotFound) {
			return err
		}
		msg := "no participant has this study ID"
		if sid == "" {
			msg = "enter a study ID"
		}
		return s.renderExports(w, r, http.StatusUnprocessableEntity, map[string]string{"study_id": msg}, "", sid)
	}
	http.Redirect(w, r, fmt.Sprintf("/participants/%d/referral", p.ID), http.StatusSeeOther)
	return nil
}

// batchEntry is one summary in a batch zip's manifest. No internal record
// numbers: the zip leaves the system.
type batchEntry struct {
	File          string `json:"file"`
	ReferralCode  string `json:"referral_code"`
	ContentSHA256 string `json:"content_sha256"`
	PDFSHA256     string `json:"pdf_sha256"`
	Bytes         int    `json:"bytes"`
}

// batchManifest describes a batch zip.
type batchManifest struct {
	Kind          string       `json:"kind"`
	Paper         string       `json:"paper"`
	Summaries     []batchEntry `json:"summaries"`
	ReviewCaution string       `json:"review_caution"`
	// ReferralIDs is kept in the export record only, not in the zip.
	ReferralIDs []int64 `json:"referral_ids,omitempty"`
}

// referralBatch issues a summary for every case ready to refer and sends
// them as one zip of PDFs with a manifest; each summary and the zip are
// recorded.
func (s *Server) referralBatch(w http.ResponseWriter, r *http.Request) error {
	if err := r.ParseForm(); err != nil {
		return err
	}
	if _, err := s.codeSecret(); err != nil {
		return err
	}
	ctx := r.Context()
	paper := paperOf(r.PostForm.Get("paper"), s.studyPaper(ctx))
	ready, err := s.store.ReadyToRefer(ctx)
	if err != nil {
		return err
	}
	if len(ready) == 0 {
		return s.renderExports(w, r, http.StatusUnprocessableEntity, nil, "No case is ready to refer: none has an over-read confirming atrial fibrillation and is still being worked.", "")
	}
	a := s.actor(r)
	man := batchManifest{Kind: "referral summaries", Paper: paperLabel(paper), ReviewCaution: deid.ReviewCaution}
	buf, err := newDownloadFile()
	if err != nil {
		return err
	}
	defer buf.Close()
	zw := zip.NewWriter(buf)
	for _, c := range ready {
		ref, pdf, err := s.issue(ctx, a, c.ParticipantID, c.CaseID, "zip", paper)
		if err != nil {
			return err
		}
		e := batchEntry{File: "referral-" + ref.Code + ".pdf", ReferralCode: ref.Code, ContentSHA256: ref.ContentSHA256, PDFSHA256: ref.PDFSHA256, Bytes: len(pdf)}
		if err := zipFile(zw, e.File, pdf); err != nil {
			return err
		}
		man.Summaries = append(man.Summaries, e)
		man.ReferralIDs = append(man.ReferralIDs, ref.ID)
	}
	if _, err := zipCautions(zw); err != nil {
		return err
	}
	inZip := man
	inZip.ReferralIDs = nil
	mj, err := json.MarshalIndent(inZip, "", "  ")
	if err != nil {
		return err
	}
	if err := zipFile(zw, "manifest.json", mj); err != nil {
		return err
	}
	if err := zw.Close(); err != nil {
		return fmt.Errorf("web: batch zip: %w", err)
	}
	rec, err := json.Marshal(man)
	if err != nil {
		return err
	}
	name := fmt.Sprintf("referral-summaries-%s.zip", s.now().UTC().Format("20060102-150405"))
	if _, err := s.store.RecordExport(ctx, a, db.Export{Kind: db.ExportReferralBatch, FileName: name, Bytes: buf.Size(),
		SHA256: buf.SHA256(), Manifest: rec}); err != nil {
		return err
	}
	return buf.sendZip(w, name)
}

// zipFile adds one file with the placeholder date, so a zip's bytes depend
// on its contents only.
func zipFile(zw *zip.Writer, name string, b []byte) error {
	f, err := zw.CreateHeader(&zip.FileHeader{Name: name, Method: zip.Deflate, Modified: deid.PlaceholderDate()})
	if err != nil {
		return fmt.Errorf("web: zip %s: %w", name, err)
	}
	if _, err := f.Write(b); err != nil {
		return fmt.Errorf("web: zip %s: %w", name, err)
	}
	return nil
}

func sendZip(w http.ResponseWriter, name string, b []byte) error {
	w.Header().Set("Content-Type", "application/zip")
	w.Header().Set("Content-Disposition", `attachment; filename="`+url.PathEscape(name)+`"`)
	w.Header().Set("Content-Length", strconv.Itoa(len(b)))
	w.Header().Set("Cache-Control", "no-store")
	w.Header().Set("X-Content-SHA256", sha256Hex(b))
	_, err := w.Write(b)
	return err
}

// referralModel builds the print view of a summary.
func (s *Server) referralModel(r *http.Request, sum referral.Summary, paper, paperBase string) views.ReferralModel {
	m := views.ReferralModel{Page: s.page(r, "Referral summary", "exports"), Doc: referralDoc(sum), Paper: paper}
	for _, p := range []string{paperA4, paperLetter} {
		m.PaperLinks = append(m.PaperLinks, views.PaperLink{Href: paperBase + p, Label: paperLabel(p), Current: p == paper})
	}
	return m
}

// referralDoc turns a summary into the print view's model.
func referralDoc(sum referral.Summary) views.ReferralDocView {
	d := views.ReferralDocView{Code: sum.ReferralCode, RiskNote: sum.Risk.Note, Contact: orDash(sum.ContactRoute), Draft: sum.Draft, DraftMark: referral.DraftMark}
	if sum.SignOff != nil {
		d.SignedOff = sum.SignOff.Text() + "."
	}
	d.Facts = []views.Fact{{Label: "Age band", Value: sum.AgeBand}, {Label: "Sex", Value: sum.Sex},
		{Label: "Screening protocol", Value: orDash(sum.Protocol)}, {Label: "Issued on", Value: "study day " + strconv.Itoa(sum.IssuedStudyDay)}}
	if o := sum.OverRead; o != nil {
		d.OverRead = []views.Fact{{Label: "Over-read verdict", Value: o.RhythmLabel}, {Label: "Read by", Value: o.Reader + ", confidence " + o.Confidence},
			{Label: "Read on", Value: "study day " + strconv.Itoa(o.StudyDay)}}
	} else {
		d.OverRead = []views.Fact{{Label: "Over-read verdict", Value: "no over-read yet"}}
	}
	if rec := sum.Recording; rec != nil {
		d.OverRead = append(d.OverRead, views.Fact{Label: "Recording", Value: fmt.Sprintf("study day %d, %.0f s, single lead", rec.StudyDay, rec.DurationS)},
			views.Fact{Label: overread.AutoHeading, Value: rec.AutoInterpretation})
		if len(rec.MicroVolts) > 0 {
			l := rec.Strip()
			sv := stripView("summary-ecg", l, referralpdf.StripCaption(*rec, l))
			d.Strip = &sv
			d.StripNote = "Print at 100% (no fit to page) for the scale to hold."
		}
	}
	for _, w := range sum.FlaggedWeeks {
		v := views.ReferralWeekView{Week: strconv.Itoa(w.StudyWeek), Days: fmt.Sprintf("%d–%d", w.FirstDay, w.LastDay), Verdict: w.Verdict,
			Wear: strconv.FormatFloat(w.WearHours, 'f', 1, 64), Reason: w.Reason, MostIrregular: w.MostIrregular}
		for _, mt := range w.Metrics {
			v.Metrics = append(v.Metrics, views.Fact{Label: mt.Label, Value: mt.Value})
		}
		d.Weeks = append(d.Weeks, v)
	}
	if hr := sum.HeartRate; hr != nil {
		d.ChartHeading = fmt.Sprintf("Heart rate in the most irregular week (study week %d)", hr.StudyWeek)
		c := hrChartView(*hr)
		d.Chart = &c
	}
	for _, f := range sum.Risk.Factors {
		d.RiskFactors = append(d.RiskFactors, views.Fact{Label: f.Label, Value: f.Answer})
	}
	for _, sc := range sum.Risk.Scores {
		d.Scores = append(d.Scores, views.ScoreBlockView{Name: sc.Name, Total: sc.ScoreText(), Items: referralpdf.ScoreItems(sc), StrokeRate: sc.StrokeRate, Source: sc.Source})
	}
	d.Cautions = sum.Cautions
	return d
}

// hrChartWidthMM fits the printable width of A4 and US Letter.
const hrChartWidthMM, hrChartHeightMM = 180, 58

// hrChartView draws the same chart layout as the PDF, as SVG numbers.
func hrChartView(hr referral.HeartRateView) views.HRChartView {
	l := hr.Layout(hrChartWidthMM, hrChartHeightMM)
	mm := func(v float64) string { return strconv.FormatFloat(v, 'f', 2, 64) }
	c := views.HRChartView{Width: mm(l.WidthMM), Height: mm(l.HeightMM), Left: mm(l.Left), Top: mm(l.Top), Right: mm(l.Right), Bottom: mm(l.Bottom),
		PlotW: mm(l.Right - l.Left), PlotH: mm(l.Bottom - l.Top), Caption: referralpdf.ChartCaption(hr),
		Label: fmt.Sprintf("Heart rate over study week %d, lowest to highest in each %d-minute bin", hr.StudyWeek, hr.BinMinutes)}
	var b strings.Builder
	for _, bar := range l.Bars {
		fmt.Fprintf(&b, "M%s %sV%s", mm(bar.X), mm(bar.Y1), mm(bar.Y2))
	}
	c.Bars = b.String()
	for _, s := range l.Shades {
		c.Shades = append(c.Shades, views.SVGBox{X: mm(s.X), W: mm(s.W)})
	}
	for _, t := range l.YTicks {
		c.YTicks = append(c.YTicks, views.SVGTick{At: mm(t.At), Label: t.Label})
	}
	for _, t := range l.XTicks {
		c.XTicks = append(c.XTicks, views.SVGTick{At: mm(t.At), Label: t.Label})
	}
	return c
}
