package letterpdf

import (
	"encoding/xml"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort/outreach"
	"cohortdesk/cohort/referral"
	"cohortdesk/views/referralpdf"
)

// word is one word pdftotext -bbox found, in millimetres from the page's
// top-left corner.
type word struct {
	Text                   string
	XMin, YMin, XMax, YMax float64
}

// pages reads a PDF back with pdftotext -bbox (poppler-utils): the words of
// each page with their boxes. A missing pdftotext fails the test.
func pages(t *testing.T, pdf []byte) [][]word {
	t.Helper()
	bin, err := exec.LookPath("pdftotext")
	if err != nil {
		t.Fatal("pdftotext (poppler-utils) is not installed; it is needed to read the PDF back (.ci/run installs it)")
	}
	in := filepath.Join(t.TempDir(), "letters.pdf")
	if err := os.WriteFile(in, pdf, 0o600); err != nil {
		t.Fatal(err)
	}
	out, err := exec.Command(bin, "-bbox", in, "-").Output()
	if err != nil {
		t.Fatalf("pdftotext: %v", err)
	}
	// The output is XHTML: <page><word xMin= yMin= xMax= yMax=>text</word>...
	type xw struct {
		XMin float64 `xml:"xMin,attr"`
		YMin float64 `xml:"yMin,attr"`
		XMax float64 `xml:"xMax,attr"`
		YMax float64 `xml:"yMax,attr"`
		Text string  `xml:",chardata"`
	}
	type xp struct {
		Words []xw `xml:"word"`
	}
	var doc struct {
		Body struct {
			Doc struct {
				Pages []xp `xml:"page"`
			} `xml:"doc"`
		} `xml:"body"`
	}
	dec := xml.NewDecoder(strings.NewReader(string(out)))
	dec.Strict = false
	dec.Entity = xml.HTMLEntity
	if err := dec.Decode(&doc); err != nil {
		t.Fatalf("pdftotext -bbox output: %v", err)
	}
	const mm = 25.4 / 72 // points to millimetres
	var res [][]word
	for _, p := range doc.Body.Doc.Pages {
		var ws []word
		for _, w := range p.Words {
			ws = append(ws, word{strings.TrimSpace(w.Text), w.XMin * mm, w.YMin * mm, w.XMax * mm, w.YMax * mm})
		}
		res = append(res, ws)
	}
	return res
}

func sample(n int) []Letter {
	var out []Letter
	for i := 1; i <= n; i++ {
		out = append(out, Letter{
			Address:   []string{fmt.Sprintf("Wren%d Alderby", i), fmt.Sprintf("%d Mill Lane", i), "Riverside 55501"},
			Reference: fmt.Sprintf("RV-%04d", i),
			Subject:   "A message from your study team",
			Body:      "Dear Wren,\n\nThank you for taking part. A member of the study team would like to speak with you.\n\nPlease contact the study team: call 555-0100 on working days.\n\nWith thanks,\nThe study team",
		})
	}
	return out
}

var from = Sender{Study: "Riverside Rhythm Study", Contact: "call 555-0100 on working days, 9:00 to 17:00"}

// TestAddressInTheWindowOneLetterPerPage reads the PDF back: one page per
// letter, each page's address words inside the address area, every word
// inside the area reachable by any window (in any position of the sheet in
// any of the paper's envelopes) is an address word, and each page names its
// own participant.
func TestAddressInTheWindowOneLetterPerPage(t *testing.T) {
	for _, paper := range []outreach.Paper{outreach.PaperA4, outreach.PaperLetter} {
		t.Run(paper.Name, func(t *testing.T) {
			letters := sample(5)
			pdf, err := Render(letters, from, paper, "Monday 1 June 2026", time.Date(2026, 6, 1, 9, 0, 0, 0, time.UTC))
			if err != nil {
				t.Fatal(err)
			}
			got := pages(t, pdf)
			if len(got) != len(letters) {
				t.Fatalf("%d pages for %d letters", len(got), len(letters))
			}
			area := outreach.AddressArea(paper)
			const tol = 0.5 // mm: glyph boxes against the layout's cells
			reach := outreach.WindowReach(paper)
			for i, ws := range got {
				addr := strings.Fields(strings.Join(letters[i].Address, " "))
				var text []string
				placed := map[string]bool{}
				for _, w := range ws {
					text = append(text, w.Text)
					inside := w.XMin >= area.X-tol && w.XMax <= area.Right()+tol && w.YMin >= area.Y-tol && w.YMax <= area.Bottom()+tol
					if inside {
						placed[w.Text] = true
					}
					visible := w.XMax > reach.X && w.XMin < reach.Right() && w.YMax > reach.Y && w.YMin < reach.Bottom()
					if visible && (!inside || !contains(addr, w.Text)) {
						t.Errorf("page %d: %q at (%.1f-%.1f, %.1f-%.1f) mm can show through a window (reach %+v)", i+1, w.Text, w.XMin, w.XMax, w.YMin, w.YMax, reach)
					}
				}
				for _, a := range addr {
					if !placed[a] {
						t.Errorf("page %d: address word %q is not inside the address area %+v", i+1, a, area)
					}
				}
				all := strings.Join(text, " ")
				if !strings.Contains(all, letters[i].Reference) || !strings.Contains(all, "Monday 1 June 2026") {
					t.Errorf("page %d does not name %s or its date:\n%s", i+1, letters[i].Reference, all)
				}
				for j, other := range letters {
					if j != i && strings.Contains(all, other.Reference) {
						t.Errorf("page %d names %s too", i+1, other.Reference)
					}
				}
			}
		})
	}
}

func contains(list []string, s string) bool {
	for _, x := range list {
		if x == s {
			return true
		}
	}
	return false
}

func TestRenderRefusesWhatCannotBePrinted(t *testing.T) {
	l := sample(1)
	l[0].Address = append(l[0].Address, "Line four", "Line five", "Line six")
	if _, err := Render(l, from, outreach.PaperLetter, "today", time.Time{}); err == nil || !strings.Contains(err.Error(), "RV-0001") {
		t.Fatalf("six address lines in a US No. 10 window: %v", err)
	}
	l = sample(1)
	l[0].Body = strings.Repeat("A long paragraph of words. ", 400)
	if _, err := Render(l, from, outreach.PaperA4, "today", time.Time{}); err == nil || !strings.Contains(err.Error(), "one page") {
		t.Fatalf("a body longer than a page: %v", err)
	}
	// The same letters and time give the same bytes.
	a, _ := Render(sample(2), from, outreach.PaperA4, "today", time.Date(2026, 6, 1, 0, 0, 0, 0, time.UTC))
	b, _ := Render(sample(2), from, outreach.PaperA4, "today", time.Date(2026, 6, 1, 0, 0, 0, 0, time.UTC))
	if string(a) != string(b) {
		t.Fatal("the same batch gave different bytes")
	}
}

var pageCount = regexp.MustCompile(`/Type /Page\b`)

// BenchmarkLetters200VersusReferralPage: the letter PDF of 200 cases (one
// page each) and, as the baseline, the referral summary PDF per page,
// measured in the same run. Reported: ms per letter page and ms per referral
// page.
func BenchmarkLetters200VersusReferralPage(b *testing.B) {
	letters := sample(200)
	sum := fullSummary()
	var letterNs, refNs, refPages int64
	for b.Loop() {
		t0 := time.Now()
		pdf, err := Render(letters, from, outreach.PaperA4, "Monday 1 June 2026", time.Time{})
		if err != nil {
			b.Fatal(err)
		}
		letterNs += time.Since(t0).Nanoseconds()
		if n := len(pageCount.FindAll(pdf, -1)); n != 200 {
			b.Fatalf("%d pages", n)
		}
		t0 = time.Now()
		rp, err := referralpdf.Render(sum, referralpdf.PaperA4)
		if err != nil {
			b.Fatal(err)
		}
		refNs += time.Since(t0).Nanoseconds()
		refPages += int64(len(pageCount.FindAll(rp, -1)))
	}
	n := float64(b.N)
	b.ReportMetric(float64(letterNs)/n/1e6, "ms/200-letters")
	b.ReportMetric(float64(letterNs)/n/1e6/200, "ms/letter-page")
	b.ReportMetric(float64(refNs)/float64(refPages)/1e6, "ms/referral-page")
	b.ReportMetric(float64(refNs)/float64(refPages)/(float64(letterNs)/n/200), "letter-pages-per-referral-page-time")
}

// fullSummary is a referral summary with everything a real one draws: a
// week of heart rate in 10-minute bins with irregular stretches, a 30 s
// strip at 300 Hz with its beats, an over-read and the cautions.
func fullSummary() referral.Summary {
	sum := referral.Summary{ReferralCode: "RC-7Q2M-K4", AgeBand: "60-69", Sex: "female", Protocol: "standard v1", IssuedStudyDay: 120,
		ContactRoute: "call 555-0100 on working days", Cautions: []string{"Screening is not diagnosis.", "A negative week does not rule out atrial fibrillation."}}
	for w := 3; w <= 5; w++ {
		sum.FlaggedWeeks = append(sum.FlaggedWeeks, referral.WeekView{StudyWeek: w, FirstDay: 7 * w, LastDay: 7*w + 6, Verdict: "positive",
			Reason: "irregular windows above the limit", WearHours: 101.5, Metrics: []referral.Metric{{Label: "irregular share", Value: "0.37"}}})
	}
	hr := &referral.HeartRateView{StudyWeek: 4, FirstStudyDay: 28, Minutes: 7 * 24 * 60, BinMinutes: 10, Readings: 9000, WindowMinutes: 30}
	for m := 0; m < hr.Minutes; m += 10 {
		base := 62 + (m/10)%17
		hr.Bins = append(hr.Bins, referral.HRBin{Minute: m, Min: base, Max: base + 9 + (m/10)%5})
	}
	for m := 600; m < hr.Minutes; m += 1440 {
		hr.Irregular = append(hr.Irregular, referral.Span{From: m, To: m + 90})
	}
	sum.HeartRate = hr
	rec := &referral.RecordingView{StudyDay: 40, DurationS: 30, AutoInterpretation: "none", RateHz: 300, ShownSeconds: 30}
	for i := 0; i < 9000; i++ {
		v := int16(0)
		if i%260 < 8 {
			v = 1000
		}
		rec.MicroVolts = append(rec.MicroVolts, v)
		if i%260 == 0 {
			rec.Beats = append(rec.Beats, i)
		}
	}
	sum.Recording = rec
	sum.OverRead = &referral.OverReadView{Rhythm: "af", RhythmLabel: "atrial fibrillation", Reader: "reader 1", Confidence: "certain", StudyDay: 42}
	return sum
}
