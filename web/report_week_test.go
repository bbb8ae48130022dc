package web

import (
	"archive/zip"
	"bytes"
	"context"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/deid"
	"cohortdesk/web/browsertest"

	"github.com/chromedp/cdproto/cdp"
	"github.com/chromedp/cdproto/emulation"
	"github.com/chromedp/cdproto/page"
	"github.com/chromedp/chromedp"
)

// TestWeeklyReportShowsTheWeek reads the weekly report of the small demo with
// confirmed cases:
//   - by default it reports the last complete calendar week (Monday to
//     Sunday in the study's zone), across the whole study, beside the figures
//     so far, while the cascade and the agreement figures stay cumulative
//     (the cascade's first box holds every participant, not those enrolled in
//     the week);
//   - for a week with activity, each figure equals the count made here from
//     the tables directly, in the week and so far;
//   - the ready-made weeks keep the cascade cumulative;
//   - the CSV bundle holds the same figures.
func TestWeeklyReportShowsTheWeek(t *testing.T) {
	a := newApp(t)
	demoCanaries(t, a)
	ctx := context.Background()
	c := a.signIn(cohort.Investigator)
	st, err := a.store.StudySettings(ctx)
	if err != nil {
		t.Fatal(err)
	}
	loc := st.Location()
	today := cohort.DateOf(a.srv.now().In(loc))
	from, to := today.Monday().AddDays(-7), today.Monday().AddDays(-1)

	var everyone string
	if err := a.store.Pool().QueryRow(ctx, `SELECT count(*)::text FROM participants`).Scan(&everyone); err != nil {
		t.Fatal(err)
	}
	_, body := a.get(c, "/progress/report")
	if got, want := byTestID(body, "report-week"), cohort.DayRangeLabel(from, to); !strings.HasPrefix(got, want) {
		t.Errorf("the report's week is %q, want the last complete week %q", got, want)
	}
	if got := byTestID(body, "cascade-count-enrolled"); got != everyone {
		t.Errorf("the cascade's first box holds %q participants, want every one (%s)", got, everyone)
	}

	// A week in which the demo's staff worked: that of the latest contact
	// attempt.
	var latest time.Time
	if err := a.store.Pool().QueryRow(ctx, `SELECT max(at) FROM contact_attempts`).Scan(&latest); err != nil {
		t.Fatal(err)
	}
	from = cohort.DateOf(latest.In(loc)).Monday()
	to = from.AddDays(6)
	start, end := from.In(loc), to.AddDays(1).In(loc)
	count := func(sql string, args ...any) string {
		t.Helper()
		var n int
		if err := a.store.Pool().QueryRow(ctx, sql, args...).Scan(&n); err != nil {
			t.Fatalf("%s: %v", sql, err)
		}
		return strconv.Itoa(n)
	}
	want := map[string][2]string{
		"attempts": {count(`SELECT count(*) FROM contact_attempts WHERE at >= $1 AND at < $2`, start, end), count(`SELECT count(*) FROM contact_attempts WHERE at < $1`, end)},
		"reached": {count(`SELECT count(*) FROM contact_attempts WHERE outcome = 'reached' AND at >= $1 AND at < $2`, start, end),
			count(`SELECT count(*) FROM contact_attempts WHERE outcome = 'reached' AND at < $1`, end)},
		"flagged":    {count(`SELECT count(*) FROM cases WHERE flagged_at >= $1 AND flagged_at < $2`, start, end), count(`SELECT count(*) FROM cases WHERE flagged_at < $1`, end)},
		"recordings": {count(`SELECT count(*) FROM recordings WHERE received_at >= $1 AND received_at < $2`, start, end), count(`SELECT count(*) FROM recordings WHERE received_at < $1`, end)},
		"over-reads": {count(`SELECT count(*) FROM over_reads WHERE read_on BETWEEN $1::date AND $2::date`, from.String(), to.String()),
			count(`SELECT count(*) FROM over_reads WHERE read_on <= $1::date`, to.String())},
		"referred": {count(`SELECT count(*) FROM referrals WHERE signed_off_at >= $1 AND signed_off_at < $2`, start, end), count(`SELECT count(*) FROM referrals WHERE signed_off_at < $1`, end)},
		"enrolled": {count(`SELECT count(*) FROM participants WHERE enrolled_on BETWEEN $1::date AND $2::date`, from.String(), to.String()),
			count(`SELECT count(*) FROM participants WHERE enrolled_on <= $1::date`, to.String())},
	}
	if want["attempts"][0] == "0" {
		t.Fatal("no contact attempt in the week chosen: the check says nothing")
	}
	path := "/progress/report?since=" + from.String() + "&until=" + to.String()
	_, body = a.get(c, path)
	for key, w := range want {
		row := section(body, "activity-"+key)
		if got := [2]string{byTestID(row, "week"), byTestID(row, "sofar")}; got != w {
			t.Errorf("%s: the report says %v in the week and so far, the tables %v", key, got, w)
		}
	}
	if got := byTestID(body, "cascade-count-enrolled"); got != everyone {
		t.Errorf("with a week chosen, the cascade's first box holds %q participants, want every one (%s)", got, everyone)
	}
	// A monitor, who sees no dates, chooses the same week as a recruitment
	// week and reads the same figures, with no day of it on the page.
	first, err := a.store.FirstEnrolment(ctx)
	if err != nil {
		t.Fatal(err)
	}
	rw := strconv.Itoa(deid.RecruitmentWeek(first, from))
	_, mbody := a.get(a.signIn(cohort.Monitor), "/progress/report?week_from="+rw+"&week_to="+rw)
	for key, w := range want {
		row := section(mbody, "activity-"+key)
		if got := [2]string{byTestID(row, "week"), byTestID(row, "sofar")}; got != w {
			t.Errorf("monitor, recruitment week %s: %s reads %v, the tables %v", rw, key, got, w)
		}
	}
	if got := byTestID(mbody, "report-week"); !strings.HasPrefix(got, "recruitment week "+rw) {
		t.Errorf("the monitor's report week reads %q, want recruitment week %s", got, rw)
	}
	if strings.Contains(mbody, from.String()) || strings.Contains(mbody, from.Label()) {
		t.Errorf("the monitor's report shows the week's first day %s", from)
	}
	for _, m := range regexp.MustCompile(`data-testid="report-quick" href="([^"]+)"`).FindAllStringSubmatch(body, -1) {
		_, page := a.get(c, strings.ReplaceAll(m[1], "&amp;", "&"))
		if got := byTestID(page, "cascade-count-enrolled"); got != everyone {
			t.Errorf("ready-made week %s: the cascade's first box holds %q, want %s", m[1], got, everyone)
		}
	}

	res, zipped := a.get(c, strings.Replace(path, "/progress/report", "/progress/report.zip", 1))
	if res.StatusCode != 200 {
		t.Fatalf("report zip: %d", res.StatusCode)
	}
	zr, err := zip.NewReader(bytes.NewReader([]byte(zipped)), int64(len(zipped)))
	if err != nil {
		t.Fatal(err)
	}
	files := map[string]string{}
	for _, f := range zr.File {
		r, _ := f.Open()
		var b bytes.Buffer
		b.ReadFrom(r)
		r.Close()
		files[f.Name] = b.String()
	}
	for _, rec := range csvRecords(t, []byte(files["activity.csv"])) {
		if w, ok := want[rec["figure"]]; ok && (rec["in_the_days"] != w[0] || rec["so_far"] != w[1] || rec["first_day"] != from.String()) {
			t.Errorf("activity.csv %s: %v, want %v from %s", rec["figure"], rec, w, from)
		}
	}
}

// TestWeeklyReportPrintFillsItsPages prints the weekly report of the demo on
// A4 and US Letter from headless Chromium: no page but the last is left
// mostly blank (its text reaches at least 70% down the printable height),
// no box of the cascade is split between pages, and in the print layout no table
// is wider than the page and no cell's words stick out of it (a column
// squeezed below its words).
func TestWeeklyReportPrintFillsItsPages(t *testing.T) {
	a := newApp(t)
	loadDemo(t, a, 120)
	_, html := a.get(a.signIn(cohort.Investigator), "/progress/report")
	b := browsertest.Start(t, 2*time.Minute)
	browserSignIn(b, a.ts.URL, "investigator@example.org")
	for _, tt := range []struct {
		paper string
		width int64 // printable width in CSS px: the paper less the 15 mm margins, at 96 px an inch
	}{{"a4", 680}, {"letter", 703}} {
		b.Do("open the report on "+tt.paper,
			chromedp.Navigate(a.ts.URL+"/progress/report?paper="+tt.paper),
			chromedp.WaitVisible(chromedp.CSS(`[data-testid="report-doc"]`)),
		)
		// The print layout, measured at the page's width.
		b.Do("print layout", chromedp.EmulateViewport(tt.width, 1000), chromedp.Func(func(ctx context.Context, tg *chromedp.Target) error {
			_, err := cdp.Call(ctx, tg, emulation.SetEmulatedMedia, emulation.SetEmulatedMediaParams{Media: "print"})
			return err
		}))
		squeezed, err := chromedp.Run(b.Context(), chromedp.Evaluate[[]string](`(() => {
			const out = [];
			const doc = document.querySelector('[data-testid="report-doc"]');
			for (const table of doc.querySelectorAll('table')) {
				if (table.scrollWidth > doc.clientWidth + 1) out.push(table.dataset.testid + ' is ' + table.scrollWidth + ' px wide on a ' + doc.clientWidth + ' px page');
				for (const cell of table.querySelectorAll('th, td')) {
					if (cell.scrollWidth > cell.clientWidth + 1) out.push(table.dataset.testid + ': "' + cell.textContent.trim() + '" sticks out of its ' + cell.clientWidth + ' px column');
				}
			}
			return out.slice(0, 8);
		})()`))
		if err != nil {
			t.Fatal(err)
		}
		for _, s := range squeezed {
			t.Errorf("%s: %s", tt.paper, s)
		}
		b.Do("back to the screen", chromedp.Func(func(ctx context.Context, tg *chromedp.Target) error {
			_, err := cdp.Call(ctx, tg, emulation.SetEmulatedMedia, emulation.SetEmulatedMediaParams{Media: ""})
			return err
		}))
		pdf, err := chromedp.Run(b.Context(), chromedp.PrintToPDF(func(p *page.PrintToPDFParams) {
			yes := true
			p.PreferCSSPageSize = &yes
			p.PrintBackground = &yes
		}))
		if err != nil {
			t.Fatalf("print %s: %v", tt.paper, err)
		}
		pages := pdfPageFill(t, pdf)
		if len(pages) < 2 {
			t.Fatalf("%s: %d pages; the demo's report should take more than one", tt.paper, len(pages))
		}
		for i, p := range pages[:len(pages)-1] {
			if p.fill < 0.7 {
				t.Errorf("%s: page %d of %d is filled to %.0f%% of its height", tt.paper, i+1, len(pages), 100*p.fill)
			}
		}
		// The cascade may run over a page break between its boxes, never
		// through a box: each box's name and its count share a page.
		all := ""
		for _, p := range pages {
			all += p.text + " "
		}
		for box, label := range map[string]string{"enrolled": "Enrolled", "screen_positive": "Screen-positive", "reached": "Reached", "referred": "Referred"} {
			n := byTestID(html, "cascade-count-"+box)
			whole := false
			for _, p := range pages {
				if strings.Contains(p.text, label+" ") && regexp.MustCompile(`\b`+n+` participants?\b`).MatchString(p.text) {
					whole = true
				}
			}
			if n == "" || !whole {
				t.Errorf("%s: the cascade's box %q (%s participants) is not printed whole on one page", tt.paper, label, n)
			}
		}
		if os.Getenv("COHORTDESK_KEEP_PRINT") != "" {
			os.WriteFile(filepath.Join(os.TempDir(), "weekly-report-demo-"+tt.paper+".pdf"), pdf, 0o644)
		}
	}
}

// printedPage is one page of a PDF: its words and how far down the page
// they reach, as a share of the printable height.
type printedPage struct {
	text string
	fill float64
}

// pdfPageFill reads a PDF's pages with pdftotext -bbox (poppler-utils): the
// words of each page and the bottom of its lowest word, measured within the
// printable area (the 15 mm margins of the report's @page rules taken off).
func pdfPageFill(tb testing.TB, pdf []byte) []printedPage {
	tb.Helper()
	bin, err := exec.LookPath("pdftotext")
	if err != nil {
		tb.Fatal("pdftotext (poppler-utils) is not installed; it is needed to read the PDF back (.ci/run installs it)")
	}
	in := filepath.Join(tb.TempDir(), "in.pdf")
	if err := os.WriteFile(in, pdf, 0o600); err != nil {
		tb.Fatal(err)
	}
	out, err := exec.Command(bin, "-bbox", in, "-").Output()
	if err != nil {
		tb.Fatalf("pdftotext -bbox: %v", err)
	}
	const margin = 15 / 25.4 * 72 // 15 mm in points
	pageRE := regexp.MustCompile(`(?s)<page width="([0-9.]+)" height="([0-9.]+)">(.*?)</page>`)
	wordRE := regexp.MustCompile(`<word xMin="[0-9.]+" yMin="[0-9.]+" xMax="[0-9.]+" yMax="([0-9.]+)">([^<]*)</word>`)
	var pages []printedPage
	for _, pm := range pageRE.FindAllStringSubmatch(string(out), -1) {
		h, _ := strconv.ParseFloat(pm[2], 64)
		var p printedPage
		var words []string
		low := 0.0
		for _, wm := range wordRE.FindAllStringSubmatch(pm[3], -1) {
			y, _ := strconv.ParseFloat(wm[1], 64)
			low = max(low, y)
			words = append(words, wm[2])
		}
		p.text = strings.Join(words, " ")
		p.fill = (low - margin) / (h - 2*margin)
		pages = append(pages, p)
	}
	if len(pages) == 0 {
		tb.Fatal(fmt.Sprintf("no page in the PDF (%d bytes)", len(pdf)))
	}
	return pages
}
