// Package referralpdf draws a referral summary (cohort/referral.Summary) as a
// PDF on the server, without a browser. Summaries are issued through it
// (web/referralissue), so the bytes recorded are the bytes sent.
package referralpdf

import (
	"bytes"
	"fmt"
	"strconv"
	"strings"

	"cohortdesk/cohort/deid"
	"cohortdesk/cohort/ecg"
	"cohortdesk/cohort/overread"
	"cohortdesk/cohort/referral"

	"github.com/go-pdf/fpdf"
)

// Paper sizes of the summary, as recorded and as chosen in the print view.
const (
	PaperA4     = "a4"
	PaperLetter = "letter"
)

// pdfDoc wraps fpdf with the summary's text helpers. fpdf's core fonts speak
// Windows-1252, so every string goes through tr.
type pdfDoc struct {
	*fpdf.Fpdf
	tr            func(string) string
	left, width   float64 // printable column
	pageH, bottom float64
}

const (
	pdfMargin = 15.0
	pdfLine   = 4.6 // body line height, mm
)

// Render draws a summary as a PDF on the chosen paper. The same summary
// and paper give the same bytes: the document's own dates are the fixed
// placeholder of deid.PlaceholderDate and the catalogue is written sorted.
func Render(sum referral.Summary, paper string) ([]byte, error) {
	size := "A4"
	if paper == PaperLetter {
		size = "Letter"
	}
	f := fpdf.New("P", "mm", size, "")
	d := &pdfDoc{Fpdf: f, tr: f.UnicodeTranslatorFromDescriptor("")}
	w, h := f.GetPageSize()
	d.left, d.width, d.pageH, d.bottom = pdfMargin, w-2*pdfMargin, h, 18
	f.SetMargins(pdfMargin, pdfMargin, pdfMargin)
	f.SetAutoPageBreak(true, d.bottom)
	f.SetCreationDate(deid.PlaceholderDate())
	f.SetModificationDate(deid.PlaceholderDate())
	f.SetCatalogSort(true)
	f.SetProducer("cohortdesk", false)
	f.SetCreator("cohortdesk", false)
	f.SetTitle("Referral summary "+sum.ReferralCode, false)
	f.AliasNbPages("{nb}")
	f.SetFooterFunc(func() {
		f.SetY(-12)
		f.SetFont("Helvetica", "", 7.5)
		f.SetTextColor(90, 100, 104)
		foot := fmt.Sprintf("Referral code %s · page %d of {nb} · de-identified: a member of the study team reviews it before release",
			sum.ReferralCode, f.PageNo())
		if sum.Draft {
			f.SetTextColor(160, 40, 32)
			foot = "DRAFT, not signed off · " + foot
		}
		f.CellFormat(0, 4, d.tr(foot), "", 0, "C", false, 0, "")
	})
	f.AddPage()

	f.SetTextColor(31, 42, 46)
	f.SetFont("Helvetica", "B", 17)
	f.CellFormat(0, 9, d.tr("Referral summary"), "", 1, "L", false, 0, "")
	d.small("De-identified summary for the participant's physician from a remote heart-rhythm screening study. " +
		"Days are counted from the participant's enrolment in the study (study day 0); calendar dates are withheld.")
	f.Ln(2)

	// The referral code box.
	y := f.GetY()
	f.SetFillColor(226, 239, 237)
	f.Rect(d.left, y, d.width, 24, "F")
	f.SetXY(d.left+4, y+3)
	d.label("Referral code (quote it when contacting the study team)")
	f.SetXY(d.left+4, y+8)
	f.SetFont("Courier", "B", 18)
	f.CellFormat(80, 9, d.tr(sum.ReferralCode), "", 0, "L", false, 0, "")
	facts := [][2]string{{"Age band", sum.AgeBand}, {"Sex", sum.Sex}, {"Screening protocol", orDash(sum.Protocol)},
		{"Issued on", "study day " + strconv.Itoa(sum.IssuedStudyDay)}}
	for i, kv := range facts {
		f.SetXY(d.left+92+float64(i%2)*44, y+4+float64(i/2)*9)
		d.label(kv[0])
		f.SetXY(d.left+92+float64(i%2)*44, y+8+float64(i/2)*9)
		f.SetFont("Helvetica", "B", 9.5)
		f.CellFormat(44, 4.5, d.tr(kv[1]), "", 0, "L", false, 0, "")
	}
	f.SetY(y + 27)
	d.status(sum)

	d.heading("Confirmation ECG and over-read")
	if o := sum.OverRead; o != nil {
		d.pair("Over-read verdict", o.RhythmLabel, true)
		d.pair("Read by", o.Reader+", confidence "+o.Confidence, false)
		d.pair("Read on", "study day "+strconv.Itoa(o.StudyDay), false)
	} else {
		d.pair("Over-read verdict", "no over-read yet", true)
	}
	if r := sum.Recording; r != nil {
		d.pair("Recording", fmt.Sprintf("study day %d, %.0f s, single lead", r.StudyDay, r.DurationS), false)
		d.pair(overread.AutoHeading, r.AutoInterpretation, false)
	}

	d.heading("Flagged study weeks")
	d.weeksTable(sum.FlaggedWeeks)

	if hr := sum.HeartRate; hr != nil {
		d.need(78)
		d.heading(fmt.Sprintf("Heart rate in the most irregular week (study week %d)", hr.StudyWeek))
		d.chart(*hr, d.width, 58)
		d.small(ChartCaption(*hr))
	}

	// The cautions stay together on one page: their height, heading and
	// all, is measured before they are drawn.
	f.SetFont("Helvetica", "", 9)
	lines := 0
	for _, c := range sum.Cautions {
		lines += len(f.SplitText(d.tr(c), d.width-4))
	}
	d.need(18 + float64(lines)*pdfLine)
	d.heading("Cautions")
	f.SetFont("Helvetica", "", 9)
	for _, c := range sum.Cautions {
		f.SetX(d.left)
		f.CellFormat(4, pdfLine, d.tr("·"), "", 0, "L", false, 0, "")
		f.MultiCell(d.width-4, pdfLine, d.tr(c), "", "L", false)
	}

	if r := sum.Recording; r != nil && len(r.MicroVolts) > 0 {
		l := r.Strip()
		d.need(l.HeightMM + 24)
		d.heading("ECG strip at true scale")
		d.strip(l)
		d.small(StripCaption(*r, l) + " Print at 100% (no fit to page) for the scale to hold.")
	}

	d.need(60)
	d.heading("Stroke-risk factors and scores, for physician review")
	d.small(sum.Risk.Note)
	for _, fa := range sum.Risk.Factors {
		d.pair(fa.Label, fa.Answer, false)
	}
	for _, sc := range sum.Risk.Scores {
		d.need(22)
		f.Ln(1.5)
		f.SetFont("Helvetica", "B", 10)
		f.MultiCell(0, 5, d.tr(sc.Name+": "+sc.ScoreText()+" (for physician review)"), "", "L", false)
		d.small(ScoreItems(sc))
		if sc.StrokeRate != "" {
			d.small(sc.StrokeRate + ".")
		}
		d.small("Source: " + sc.Source + ".")
	}

	d.need(30)
	d.heading("Contacting the study team")
	d.body(orDash(sum.ContactRoute))

	var buf bytes.Buffer
	if err := f.Output(&buf); err != nil {
		return nil, fmt.Errorf("web: referral PDF: %w", err)
	}
	return buf.Bytes(), nil
}

// status draws a draft's mark, or who signed the summary off and when; a
// summary issued before drafts existed shows neither, as it did.
func (d *pdfDoc) status(sum referral.Summary) {
	switch {
	case sum.Draft:
		y := d.GetY()
		d.SetFillColor(251, 226, 222)
		d.Rect(d.left, y, d.width, 9, "F")
		d.SetXY(d.left+3, y+2)
		d.SetFont("Helvetica", "B", 10)
		d.SetTextColor(160, 40, 32)
		d.CellFormat(d.width-6, 5, d.tr(referral.DraftMark), "", 0, "L", false, 0, "")
		d.SetTextColor(31, 42, 46)
		d.SetY(y + 11)
	case sum.SignOff != nil:
		d.SetFont("Helvetica", "B", 10)
		d.SetX(d.left)
		d.CellFormat(0, 6, d.tr(sum.SignOff.Text()+"."), "", 1, "L", false, 0, "")
		d.Ln(1)
	}
}

func orDash(s string) string {
	if strings.TrimSpace(s) == "" {
		return "—"
	}
	return s
}

// need starts a new page unless h mm are left above the footer.
func (d *pdfDoc) need(h float64) {
	if d.GetY()+h > d.pageH-d.bottom {
		d.AddPage()
	}
}

func (d *pdfDoc) heading(s string) {
	d.need(14)
	d.Ln(3)
	d.SetFont("Helvetica", "B", 11.5)
	d.SetTextColor(45, 106, 102)
	d.MultiCell(0, 6, d.tr(s), "", "L", false)
	d.SetTextColor(31, 42, 46)
	d.Ln(0.5)
}

func (d *pdfDoc) label(s string) {
	d.SetFont("Helvetica", "", 7.5)
	d.SetTextColor(86, 100, 106)
	d.CellFormat(0, 4, d.tr(s), "", 0, "L", false, 0, "")
	d.SetTextColor(31, 42, 46)
}

func (d *pdfDoc) small(s string) {
	d.SetFont("Helvetica", "", 8.5)
	d.SetX(d.left)
	d.MultiCell(0, 4.2, d.tr(s), "", "L", false)
}

func (d *pdfDoc) body(s string) {
	d.SetFont("Helvetica", "", 9.5)
	d.SetX(d.left)
	d.MultiCell(0, pdfLine, d.tr(s), "", "L", false)
}

// pair writes a label and its value side by side, both wrapping.
func (d *pdfDoc) pair(label, value string, bold bool) {
	const lw = 58.0
	d.SetFont("Helvetica", "", 9)
	ll := d.SplitText(d.tr(label), lw-2)
	style := ""
	if bold {
		style = "B"
	}
	d.SetFont("Helvetica", style, 9.5)
	vl := d.SplitText(d.tr(value), d.width-lw)
	h := float64(max(len(ll), len(vl))) * pdfLine
	d.need(h)
	y := d.GetY()
	d.SetFont("Helvetica", "", 9)
	d.SetTextColor(86, 100, 106)
	for i, l := range ll {
		d.SetXY(d.left, y+float64(i)*pdfLine)
		d.CellFormat(lw, pdfLine, l, "", 0, "L", false, 0, "")
	}
	d.SetTextColor(31, 42, 46)
	d.SetFont("Helvetica", style, 9.5)
	for i, l := range vl {
		d.SetXY(d.left+lw, y+float64(i)*pdfLine)
		d.CellFormat(d.width-lw, pdfLine, l, "", 0, "L", false, 0, "")
	}
	d.SetXY(d.left, y+h)
}

// weeksTable draws the flagged weeks with wrapped findings.
func (d *pdfDoc) weeksTable(weeks []referral.WeekView) {
	if len(weeks) == 0 {
		d.body("No screen-positive week is attached to this summary.")
		return
	}
	cols := []float64{14, 22, 18, 20, d.width - 74}
	head := []string{"Week", "Study days", "Verdict", "Wear (h)", "What the screen found"}
	d.SetFont("Helvetica", "B", 8.5)
	d.SetFillColor(240, 242, 238)
	d.SetX(d.left)
	for i, h := range head {
		d.CellFormat(cols[i], 5.5, d.tr(h), "B", 0, "L", true, 0, "")
	}
	d.Ln(-1)
	for _, w := range weeks {
		text := w.Reason
		for _, m := range w.Metrics {
			text += "\n" + m.Label + ": " + m.Value
		}
		if w.MostIrregular {
			text += "\n(most irregular week: charted below)"
		}
		d.SetFont("Helvetica", "", 8)
		lines := d.SplitText(d.tr(text), cols[4]-1)
		h := float64(len(lines))*3.8 + 1.5
		d.need(h)
		y := d.GetY()
		cells := []string{strconv.Itoa(w.StudyWeek), fmt.Sprintf("%d–%d", w.FirstDay, w.LastDay), w.Verdict, strconv.FormatFloat(w.WearHours, 'f', 1, 64)}
		x := d.left
		for i, c := range cells {
			d.SetXY(x, y+0.5)
			d.CellFormat(cols[i], 3.8, d.tr(c), "", 0, "L", false, 0, "")
			x += cols[i]
		}
		for i, l := range lines {
			d.SetXY(x, y+0.5+float64(i)*3.8)
			d.CellFormat(cols[4], 3.8, l, "", 0, "L", false, 0, "")
		}
		d.SetDrawColor(217, 220, 214)
		d.SetLineWidth(0.2)
		d.Line(d.left, y+h, d.left+d.width, y+h)
		d.SetXY(d.left, y+h)
	}
}

// chart draws the heart-rate chart from the same layout as the HTML view.
func (d *pdfDoc) chart(hr referral.HeartRateView, w, h float64) {
	l := hr.Layout(w, h)
	x0, y0 := d.left, d.GetY()
	d.SetLineWidth(0.15)
	d.SetFillColor(251, 226, 196)
	for _, s := range l.Shades {
		d.Rect(x0+s.X, y0+l.Top, s.W, l.Bottom-l.Top, "F")
	}
	d.SetDrawColor(225, 228, 223)
	d.SetFont("Helvetica", "", 6.5)
	d.SetTextColor(86, 100, 106)
	for _, t := range l.YTicks {
		d.Line(x0+l.Left, y0+t.At, x0+l.Right, y0+t.At)
		d.SetXY(x0, y0+t.At-1.7)
		d.CellFormat(l.Left-1.5, 3.4, t.Label, "", 0, "R", false, 0, "")
	}
	for _, t := range l.XTicks {
		d.Line(x0+t.At, y0+l.Top, x0+t.At, y0+l.Bottom)
		if t.Label != "" {
			d.SetXY(x0+t.At+1, y0+l.Bottom+1)
			d.CellFormat(24, 3.4, t.Label, "", 0, "L", false, 0, "")
		}
	}
	d.SetXY(x0, y0+l.Top-3)
	d.CellFormat(30, 3, "bpm", "", 0, "L", false, 0, "")
	d.SetTextColor(31, 42, 46)
	d.SetDrawColor(31, 42, 46)
	d.SetLineWidth(0.35)
	for _, b := range l.Bars {
		d.Line(x0+b.X, y0+b.Y1, x0+b.X, y0+b.Y2)
	}
	d.SetLineWidth(0.2)
	d.SetDrawColor(150, 156, 152)
	d.Rect(x0+l.Left, y0+l.Top, l.Right-l.Left, l.Bottom-l.Top, "D")
	d.SetY(y0 + h + 1)
}

// strip draws the ECG on paper at true scale: 1 mm and 5 mm squares, the
// trace, the calibration pulse and a tick over each detected beat.
func (d *pdfDoc) strip(l ecg.StripLayout) {
	x0, y0 := d.left, d.GetY()
	d.SetFillColor(255, 253, 251)
	d.Rect(x0, y0, l.WidthMM, l.HeightMM, "F")
	grid := func(step float64, r, g, b int, width float64) {
		d.SetDrawColor(r, g, b)
		d.SetLineWidth(width)
		for x := 0.0; x <= l.WidthMM+1e-9; x += step {
			d.Line(x0+x, y0, x0+x, y0+l.HeightMM)
		}
		for y := 0.0; y <= l.HeightMM+1e-9; y += step {
			d.Line(x0, y0+y, x0+l.WidthMM, y0+y)
		}
	}
	grid(l.MinorMM, 246, 214, 211, 0.05)
	grid(l.MajorMM, 224, 138, 131, 0.15)
	path := func(pts []ecg.Point, width float64) {
		if len(pts) < 2 {
			return
		}
		d.SetLineWidth(width)
		d.MoveTo(x0+pts[0].X, y0+pts[0].Y)
		for _, p := range pts[1:] {
			d.LineTo(x0+p.X, y0+p.Y)
		}
		d.DrawPath("D")
	}
	d.SetLineJoinStyle("round")
	d.SetFont("Helvetica", "", 6)
	for _, r := range l.Rows {
		d.SetDrawColor(31, 42, 46)
		path(r.Calibration, 0.25)
		d.SetDrawColor(17, 17, 17)
		path(r.Trace, 0.22)
		d.SetDrawColor(45, 106, 102)
		d.SetLineWidth(0.35)
		for _, b := range r.Beats {
			d.Line(x0+b, y0+r.TopMM+0.5, x0+b, y0+r.TopMM+2.5)
		}
		d.SetTextColor(86, 100, 106)
		d.SetXY(x0+0.5, y0+r.TopMM+l.Options.RowHeightMM-3.5)
		d.CellFormat(30, 3, d.tr(fmt.Sprintf("%.0f–%.0f s", r.StartSeconds, r.StartSeconds+l.Options.RowSeconds)), "", 0, "L", false, 0, "")
	}
	d.SetTextColor(31, 42, 46)
	d.SetY(y0 + l.HeightMM + 1.5)
}

// ChartCaption says what the heart-rate chart shows.
func ChartCaption(hr referral.HeartRateView) string {
	s := fmt.Sprintf("Lowest to highest heart rate in each %d-minute bin, %d readings, study days %d to %d.",
		hr.BinMinutes, hr.Readings, hr.FirstStudyDay, hr.FirstStudyDay+6)
	if hr.WindowMinutes > 0 {
		s += fmt.Sprintf(" Shaded: %d-minute windows the screen counted as irregular.", hr.WindowMinutes)
	}
	return s + " A screen, not a diagnosis."
}

// StripCaption says how a summary's strip is drawn, for the PDF and the print view alike.
func StripCaption(r referral.RecordingView, l ecg.StripLayout) string {
	shown := fmt.Sprintf("%.0f s", r.ShownSeconds)
	if r.ShownSeconds+0.05 < r.DurationS {
		shown = fmt.Sprintf("first %.0f s of %.0f s", r.ShownSeconds, r.DurationS)
	}
	return fmt.Sprintf("%.0f mm/s · %.0f mm/mV · 1 mm and 5 mm squares · %s · calibration pulse 1 mV, 200 ms · %d beats detected (ticks; a hint for the reader, not a verdict).",
		l.Options.SpeedMMPerS, l.Options.GainMMPerMV, shown, len(r.Beats))
}

// ScoreItems words a score's contributing and unknown items.
func ScoreItems(sc referral.ScoreView) string {
	var parts []string
	for _, it := range sc.Items {
		parts = append(parts, fmt.Sprintf("%s %s +%d", it.Code, it.Label, it.Points))
	}
	s := "Items present: none."
	if len(parts) > 0 {
		s = "Items present: " + strings.Join(parts, "; ") + "."
	}
	if len(sc.Unknown) > 0 {
		s += " Not known from intake: " + strings.Join(sc.Unknown, "; ") + "."
	}
	return s
}
