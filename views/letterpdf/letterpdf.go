// Package letterpdf draws letters to participants as one PDF, one letter per
// page, laid out for window envelopes: the address block sits where every
// window envelope for the paper shows it (cohort/outreach.AddressArea), and
// nothing else is printed in the window's reach. Printed letters are
// recorded from the batch they came from (db.PostLetters), so the pages
// printed and the letters recorded are the same.
package letterpdf

import (
	"bytes"
	"fmt"
	"strings"
	"time"

	"cohortdesk/cohort/outreach"

	"github.com/go-pdf/fpdf"
)

// Letter is one letter as printed.
type Letter struct {
	Address   []string // the address block, one line each (name first)
	Reference string   // the participant's study number, printed at the foot
	Subject   string
	Body      string
}

// Sender is the letterhead: the study and how to reach its team. It is
// printed at the top right, outside the window, so the envelope shows
// nothing about the study.
type Sender struct {
	Study   string
	Contact string
}

// Layout of the page, in millimetres and points.
const (
	margin       = 25.0 // left and right margins of the text
	addressPt    = 10.0 // address font size
	minAddressPt = 7.0  // the smallest it shrinks to for a long line
	bodyPt       = 10.5
	bodyLine     = 5.0
	footerY      = 14.0 // distance of the foot line from the bottom edge
	foldMark     = 5.0  // length of the fold marks at the left edge
)

// ptToMM converts a font size in points to millimetres (1 pt = 1/72 in).
func ptToMM(pt float64) float64 { return pt * 25.4 / 72 }

// Render draws the letters on paper p, dated on day (written out, e.g.
// "Monday 1 June 2026"). created stamps the document (the batch's time), so
// the same batch gives the same bytes. A letter whose address does not fit
// the window or whose text runs past the page is refused, naming it.
func Render(letters []Letter, from Sender, p outreach.Paper, day string, created time.Time) ([]byte, error) {
	size := "A4"
	if p.Name == outreach.PaperLetter.Name {
		size = "Letter"
	}
	f := fpdf.New("P", "mm", size, "")
	tr := f.UnicodeTranslatorFromDescriptor("")
	f.SetAutoPageBreak(false, 0)
	f.SetMargins(margin, 15, margin)
	f.SetCreationDate(created)
	f.SetModificationDate(created)
	f.SetCatalogSort(true)
	f.SetProducer("cohortdesk", false)
	f.SetCreator("cohortdesk", false)
	f.SetTitle("Letters to participants", false)
	area, reach := outreach.AddressArea(p), outreach.WindowReach(p)
	w, h := f.GetPageSize()
	for i, l := range letters {
		f.AddPage()
		f.SetTextColor(20, 28, 32)
		// Fold marks where the sheet folds for its envelopes.
		f.SetDrawColor(150, 150, 150)
		f.SetLineWidth(0.2)
		for _, e := range outreach.Envelopes {
			if e.Paper == p {
				for y := e.Panel; y < h-1; y += e.Panel {
					f.Line(0, y, foldMark, y)
				}
			}
		}
		// The letterhead, top right, above the window.
		f.SetFont("Helvetica", "B", 11)
		f.SetXY(w/2, 15)
		f.CellFormat(w/2-margin, 5.5, tr(from.Study), "", 2, "R", false, 0, "")
		f.SetFont("Helvetica", "", 8.5)
		f.SetX(w / 2)
		f.MultiCell(w/2-margin, 4, tr(from.Contact), "", "R", false)
		if f.GetY() > reach.Y-1 {
			return nil, fmt.Errorf("letterpdf: the letterhead runs into the address window; shorten the study's name or contact route")
		}
		// The address block, inside the window area.
		if err := address(f, tr, l, area); err != nil {
			return nil, fmt.Errorf("letterpdf: letter %d (%s): %w", i+1, l.Reference, err)
		}
		// Date, subject, body: below every place a window can reach.
		f.SetFont("Helvetica", "", bodyPt)
		f.SetXY(margin, reach.Bottom()+4)
		f.CellFormat(w-2*margin, bodyLine, tr(day), "", 2, "R", false, 0, "")
		f.Ln(4)
		f.SetX(margin)
		f.SetFont("Helvetica", "B", bodyPt+0.5)
		f.MultiCell(w-2*margin, bodyLine+0.5, tr(l.Subject), "", "L", false)
		f.Ln(3)
		f.SetFont("Helvetica", "", bodyPt)
		for _, para := range strings.Split(strings.ReplaceAll(l.Body, "\r\n", "\n"), "\n") {
			f.SetX(margin)
			if strings.TrimSpace(para) == "" {
				f.Ln(bodyLine * 0.6)
				continue
			}
			f.MultiCell(w-2*margin, bodyLine, tr(para), "", "L", false)
		}
		if f.GetY() > h-footerY-4 {
			return nil, fmt.Errorf("letterpdf: letter %d (%s) does not fit on one page; shorten the template", i+1, l.Reference)
		}
		f.SetFont("Helvetica", "", 7.5)
		f.SetTextColor(90, 100, 104)
		f.SetXY(margin, h-footerY)
		f.CellFormat(w-2*margin, 4, tr("Study number "+l.Reference+" · please quote it when you contact the study team"), "", 0, "L", false, 0, "")
	}
	if f.Err() {
		return nil, fmt.Errorf("letterpdf: %w", f.Error())
	}
	var b bytes.Buffer
	if err := f.Output(&b); err != nil {
		return nil, fmt.Errorf("letterpdf: %w", err)
	}
	return b.Bytes(), nil
}

// address writes the address block inside area: at the top of the area,
// one line each, the font shrunk (down to minAddressPt) until the longest
// line fits its width. Too many lines or a line too long at the smallest
// size are refused.
func address(f *fpdf.Fpdf, tr func(string) string, l Letter, area outreach.Rect) error {
	if len(l.Address) == 0 {
		return fmt.Errorf("no address")
	}
	pt := addressPt
	for ; pt >= minAddressPt; pt -= 0.5 {
		f.SetFont("Helvetica", "", pt)
		fits := true
		for _, line := range l.Address {
			if f.GetStringWidth(tr(line)) > area.W {
				fits = false
			}
		}
		if fits {
			break
		}
	}
	if pt < minAddressPt {
		return fmt.Errorf("an address line is too long for the envelope window")
	}
	lh := ptToMM(pt) * 1.15
	if float64(len(l.Address))*lh > area.H {
		return fmt.Errorf("the address has %d lines; the envelope window shows %d", len(l.Address), int(area.H/lh))
	}
	for i, line := range l.Address {
		f.SetXY(area.X, area.Y+float64(i)*lh)
		f.CellFormat(area.W, lh, tr(line), "", 0, "L", false, 0, "")
	}
	return nil
}
