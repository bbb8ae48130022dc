package web

import (
	"bytes"
	"context"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/deid"
	"cohortdesk/cohort/deid/deidtest"
	"cohortdesk/cohort/ecg"
	"cohortdesk/cohort/ecg/ecgtest"
	"cohortdesk/cohort/overread"
	"cohortdesk/cohort/referral"
	"cohortdesk/cohort/risk"
	"cohortdesk/cohort/screen"
	"cohortdesk/views"
	"cohortdesk/views/components"
)

// pdfText reads a PDF's text back with pdftotext (poppler-utils). A missing
// tool fails the test: the check that a PDF leaks nothing must not be
// skipped silently.
func pdfText(tb testing.TB, pdf []byte) string {
	tb.Helper()
	bin, err := exec.LookPath("pdftotext")
	if err != nil {
		tb.Fatal("pdftotext (poppler-utils) is not installed; it is needed to read the PDF back (.ci/run installs it)")
	}
	dir := tb.TempDir()
	in := filepath.Join(dir, "in.pdf")
	if err := os.WriteFile(in, pdf, 0o600); err != nil {
		tb.Fatal(err)
	}
	out, err := exec.Command(bin, "-enc", "UTF-8", "-layout", in, "-").Output()
	if err != nil {
		tb.Fatalf("pdftotext: %v", err)
	}
	return string(out)
}

// squashed folds white space, so text wrapped across lines compares equal.
func squashed(s string) string { return strings.Join(strings.Fields(s), " ") }

// containsWrapped reports whether text holds want with its words in order,
// across line breaks and the columns of a layout.
func containsWrapped(text, want string) bool {
	return strings.Contains(squashed(strings.ReplaceAll(text, "-\n", "-")), squashed(want))
}

// testSummary is a fictional summary with every part filled.
func testSummary(tb testing.TB) referral.Summary {
	tb.Helper()
	s, err := referral.Build(testSource(tb), []byte(testSecret))
	if err != nil {
		tb.Fatal(err)
	}
	return s
}

// testSource is the fictional participant's record behind testSummary.
func testSource(tb testing.TB) referral.Source {
	tb.Helper()
	loc, _ := time.LoadLocation("America/Denver")
	enrolled := cohort.Date{Year: 2025, Month: 1, Day: 6}
	birth := cohort.Date{Year: 1948, Month: 9, Day: 12}
	syn, err := ecg.Synthesize(ecgtest.AFRR(70, 650, 5), ecg.SynthOptions{RateHz: 250})
	if err != nil {
		tb.Fatal(err)
	}
	var beats []int
	for _, t := range syn.RTimes {
		beats = append(beats, int(t*250))
	}
	start := enrolled.AddDays(21).In(loc).UnixMilli()
	week := &cohort.Week{Week: 3, Start: start, End: enrolled.AddDays(28).In(loc).UnixMilli()}
	for m := 0; m < 7*1440; m += 4 {
		v := int32(62 + (m/60)%9)
		if m > 2*1440 && m < 2*1440+240 {
			v += int32((m / 4 % 2) * 35)
		}
		week.HR.Append(start+int64(m)*60000, v)
	}
	src := referral.Source{
		StudyID: "FX-0007", EnrolledOn: enrolled, Location: loc, BirthDate: &birth, Sex: cohort.Male,
		Intake:   risk.Intake{Hypertension: risk.Yes, Diabetes: risk.No, HeartFailure: risk.No, StrokeTIA: risk.Unknown, Vascular: risk.No},
		Protocol: referral.Protocol{ID: 1, Name: "weekly screen", Version: 1, Params: screen.DefaultProtocol(), ParamsOK: true},
		Weeks: []referral.Week{{Week: 3, Verdict: "positive", Reason: "positive by run of 4 irregular 30-minute windows (limit 2) in 150.2 h usable wear", WearHours: 150.2,
			Result: screen.Result{Windows: []screen.WindowResult{{Minutes: 5, Usable: 10}, {Minutes: 30, Usable: 300, Irregular: 8, Share: 0.027, LongestRun: 4, Threshold: 7, MeanMASD: 3.2}}}}},
		HeartRate:    week,
		Recording:    &referral.Recording{TakenAt: time.Date(2025, 2, 3, 10, 0, 0, 0, loc), DurationS: syn.Waveform.Seconds(), RateHz: 250, Samples: syn.Waveform.Samples, Beats: beats, Auto: overread.AutoSuggestsAF},
		OverRead:     &referral.OverRead{Role: "adjudication", Rhythm: "af", Confidence: "certain", ReadOn: cohort.Date{Year: 2025, Month: 2, Day: 5}},
		ContactRoute: "Study coordinating office: reply through the secure message line quoting the referral code.",
		Cautions:     components.CautionItems,
		IssuedAt:     time.Date(2025, 2, 10, 16, 0, 0, 0, time.UTC),
	}
	return src
}

// The PDF read back holds the referral code, every caution, the scores
// labelled for physician review with their sources, and no identifier; the
// same content gives the same bytes; the paper choice sets the page size
// (A4 595.28 x 841.89 pt, US Letter 612 x 792 pt; ISO 216 and ANSI, common
// knowledge).
func TestReferralPDF(t *testing.T) {
	sum := testSummary(t)
	for _, tt := range []struct{ paper, mediaBox string }{{paperA4, "595.28 841.89"}, {paperLetter, "612.00 792.00"}} {
		pdf, err := referralPDF(sum, tt.paper)
		if err != nil {
			t.Fatal(err)
		}
		if !bytes.Contains(pdf, []byte(tt.mediaBox)) {
			t.Errorf("%s: page size %s not found", tt.paper, tt.mediaBox)
		}
		again, _ := referralPDF(sum, tt.paper)
		if !bytes.Equal(pdf, again) {
			t.Errorf("%s: two renderings of the same content differ", tt.paper)
		}
		text := pdfText(t, pdf)
		for _, want := range append([]string{sum.ReferralCode, "for physician review",
			// A man of 76 with hypertension and an unanswered stroke item:
			// A2 2 + H 1, up to 2 more for S2 (Lip et al. 2010, verified,
			// secondary; CHA2DS2-VA without Sc, 2024 ESC, from memory).
			"CHA2DS2-VASc: at least 3 (up to 5) of 9", "CHA2DS2-VA: at least 3 (up to 5) of 8",
			referral.SourceVASc, referral.SourceVA, "atrial fibrillation", "study day 30", "25 mm/s", "10 mm/mV", sum.ContactRoute, deid.ReviewCaution,
			// the recorder's own reading, in the words every page uses
			overread.AutoSuggestsAF.Label()},
			components.CautionItems...) {
			if !containsWrapped(text, want) {
				t.Errorf("%s: PDF text lacks %q", tt.paper, want)
			}
		}
		if leaks := deidtest.Leaks(text, []string{"FX-0007", "1948-09-12", "2025-02-05", "2025-02-03", "2025-02-10", "Denver"}); len(leaks) > 0 {
			t.Errorf("%s: PDF leaks %v", tt.paper, leaks)
		}
		if bytes.Contains(pdf, []byte("2025")) || bytes.Contains(pdf, []byte("1948")) {
			t.Errorf("%s: the PDF bytes hold a year of the participant's dates", tt.paper)
		}
	}
}

// The cautions are never split across pages, wherever the summary's length
// puts them: summaries with 1 to 30 flagged weeks move the cautions down the
// page and past its end.
func TestReferralPDFKeepsTheCautionsOnOnePage(t *testing.T) {
	base := testSource(t)
	for n := 1; n <= 30; n++ {
		src := base
		src.Weeks = nil
		for i := 0; i < n; i++ {
			w := base.Weeks[0]
			w.Week = 3 + i
			src.Weeks = append(src.Weeks, w)
		}
		sum, err := referral.Build(src, []byte(testSecret))
		if err != nil {
			t.Fatal(err)
		}
		pdf, err := referralPDF(sum, paperA4)
		if err != nil {
			t.Fatal(err)
		}
		text := pdfText(t, pdf)
		together := false
		for _, page := range strings.Split(text, "\f") {
			all := true
			for _, c := range components.CautionItems {
				all = all && containsWrapped(page, c)
			}
			together = together || all
		}
		if !together {
			t.Errorf("%d weeks: the cautions are split across pages (%d pages)", n, strings.Count(text, "\f"))
		}
	}
}

// BenchmarkReferralPDF measures drawing a summary as a PDF on the server,
// with drawing the same summary's HTML print view as the baseline measured
// in the same run; it reports the PDF's size and the time ratio.
func BenchmarkReferralPDF(b *testing.B) {
	sum := testSummary(b)
	doc := referralDoc(sum)
	var html time.Duration
	var size int
	for b.Loop() {
		t0 := time.Now()
		var buf bytes.Buffer
		if err := views.ReferralDocument(doc, paperA4, false).Render(context.Background(), &buf); err != nil {
			b.Fatal(err)
		}
		html += time.Since(t0)
		pdf, err := referralPDF(sum, paperA4)
		if err != nil {
			b.Fatal(err)
		}
		size = len(pdf)
	}
	b.ReportMetric(float64(size)/1024, "pdf-kB")
	b.ReportMetric(float64(html.Nanoseconds())/float64(b.N), "html-ns/op")
	b.ReportMetric(float64(b.Elapsed()-html)/float64(html), "pdf/html")
}
