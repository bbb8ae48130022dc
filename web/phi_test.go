package web

import (
	"context"
	"fmt"
	"io"
	"net/http"
	"net/url"
	"regexp"
	"slices"
	"strings"
	"testing"

	"cohortdesk/cmd/cohortdesk/demoload"
	"cohortdesk/cohort"
	"cohortdesk/cohort/cascade"
	"cohortdesk/cohort/credential"
	"cohortdesk/cohort/deid/deidtest"
)

// loadDemo fills the app's database with a small fictional study.
func loadDemo(t *testing.T, a *app, participants int) demoload.Result {
	t.Helper()
	res, err := demoload.Load(context.Background(), a.store, demoload.Options{Seed: 7, Participants: participants, PasswordCost: credential.TestParams, Password: testPassword,
		Secret: []byte(testSecret)})
	if err != nil {
		t.Fatal(err)
	}
	return res
}

var hrefRE = regexp.MustCompile(`href="(/[^"#]*)"`)

var weekChartRE = regexp.MustCompile(`^/participants/\d+\?week=`)

// TestMonitorSeesNoPHI walks, as a monitor, every GET route of the route
// table that a monitor may open (so a new route is walked without touching
// this test): every participant's page and every week of the canary
// participants' charts, every box of the cascade, every download, each also
// asked for as an htmx request, and everything those pages link to. No
// response may hold a canary identifier, the planted staff free text (notes,
// a withdrawal reason, case notes) or a calendar date of a participant in any
// common form, including epoch milliseconds in chart data, keyset cursors in
// page links and the files of the report's zip. The same walk as a
// coordinator finds the free text, the identifiers and the planted dates,
// which proves the checks can see a leak.
func TestMonitorSeesNoPHI(t *testing.T) {
	a := newApp(t)
	f := plantMonitorFixture(t, a)
	ctx := context.Background()
	var pages []string
	rows, err := a.store.Pool().Query(ctx, `SELECT id FROM participants ORDER BY id`)
	if err != nil {
		t.Fatal(err)
	}
	for rows.Next() {
		var id int64
		rows.Scan(&id)
		pages = append(pages, "/participants/"+itoa(id))
	}
	rows.Close()
	for _, pid := range f.pids {
		for w := 0; w < 20; w++ {
			pages = append(pages, fmt.Sprintf("/participants/%d?week=%d", pid, w))
		}
	}
	c, err := a.store.Cascade(ctx, cascade.Filter{})
	if err != nil {
		t.Fatal(err)
	}
	var boxes []string
	for _, b := range c.Boxes {
		boxes = append(boxes, "/progress/cascade/"+b.Key)
		for _, e := range b.Exits {
			boxes = append(boxes, "/progress/cascade/"+b.Key+"?exit="+string(e.Reason))
		}
	}
	// Every GET route a monitor may open, its path parameters filled in.
	var start []string
	walked := map[string]bool{}
	for _, rt := range a.srv.routeTable {
		if rt.method != "GET" || rt.access.public || !rt.access.allows(cohort.Monitor) {
			continue
		}
		walked[rt.pattern] = true
		switch {
		case rt.pattern == "/participants/{id}":
			start = append(start, pages...)
		case rt.pattern == "/progress/cascade/{box}":
			start = append(start, boxes...)
		case strings.Contains(rt.pattern, "{"):
			t.Errorf("route %s: the monitor walk does not know how to fill its parameters; add them here", rt.pattern)
		default:
			start = append(start, rt.pattern)
		}
	}
	start = append(start, "/participants?sort=enrolled", "/participants?sort=enrolled&desc=on", "/participants?status=withdrawn",
		"/participants.csv?sort=enrolled", "/participants.csv?status=withdrawn", "/cases?state=all",
		"/confirmations/statistics.csv?table=versions", "/confirmations/statistics.csv?table=km", "/confirmations/statistics.csv?table=kappa",
		"/progress?window=4", "/progress/report?paper=letter")
	if len(walked) < 10 {
		t.Fatalf("only %d monitor routes in the table", len(walked))
	}

	monitor := a.signIn(cohort.Monitor)
	visited := crawlAll(t, a, monitor, start, 1200, func(path, query, body string) {
		if leaks := leaksIn(body, f.canaries); len(leaks) > 0 {
			t.Errorf("monitor %s shows identifiers or staff free text: %v", path, leaks)
		}
		if leaks := dateLeaks(body, query, f.today); len(leaks) > 0 {
			t.Errorf("monitor %s shows participants' dates: %v", path, leaks[:min(len(leaks), 5)])
		}
	})
	t.Logf("monitor walk: %d routes, %d responses", len(walked), visited)

	// The control: a coordinator on the canary participants' pages sees the
	// free text, the identifiers, the dates and the chart timestamps.
	var found []string
	var dates []dateLeak
	var ctl []string
	for _, pid := range f.pids {
		ctl = append(ctl, fmt.Sprintf("/participants/%d", pid))
	}
	crawlAll(t, a, a.signIn(cohort.Coordinator), append(ctl, "/participants.csv?status=withdrawn"), len(ctl)+1, func(path, query, body string) {
		found = append(found, leaksIn(body, f.canaries)...)
		found = append(found, containsAny(body, plantedDateForms(f.planted))...)
		dates = append(dates, dateLeaks(body, query, f.today)...)
	})
	if !slices.Contains(found, freeTextMarker) || len(found) < 5 || len(dates) == 0 ||
		!slices.ContainsFunc(dates, func(d dateLeak) bool { return strings.HasPrefix(d.why, "epoch") }) {
		t.Fatalf("a coordinator sees %d planted values and %d dates: the test cannot tell a leak", len(found), len(dates))
	}
}

// crawlAll visits the start pages and every page they link to (up to limit
// responses) as the client, each also as an htmx request, and calls visit
// with the path, its query and each body; zip downloads are unpacked and
// each file visited. Server errors fail the test.
func crawlAll(t *testing.T, a *app, c *http.Client, start []string, limit int, visit func(path, query, body string)) int {
	t.Helper()
	seen := map[string]bool{}
	queue := append([]string(nil), start...)
	n := 0
	for len(queue) > 0 && n < limit {
		p := strings.ReplaceAll(queue[0], "&amp;", "&")
		queue = queue[1:]
		if seen[p] || strings.HasPrefix(p, "/assets/") || p == "/signout" {
			continue
		}
		seen[p] = true
		u, _ := url.Parse(p)
		plain := ""
		for _, htmx := range []bool{false, true} {
			req, _ := http.NewRequest("GET", a.ts.URL+p, nil)
			if htmx {
				req.Header.Set("HX-Request", "true")
			}
			res, err := c.Do(req)
			if err != nil {
				t.Fatal(err)
			}
			b, _ := io.ReadAll(res.Body)
			res.Body.Close()
			n++
			if res.StatusCode >= 500 {
				t.Errorf("%s: status %d", p, res.StatusCode)
			}
			body := string(b)
			if htmx && body == plain {
				continue // the same answer: searched already
			}
			plain = body
			if strings.Contains(res.Header.Get("Content-Type"), "zip") {
				for name, file := range unzip(t, b) {
					visit(p+"#"+name, u.RawQuery, string(file))
				}
				continue
			}
			visit(p, u.RawQuery, body)
			if htmx {
				continue
			}
			for _, m := range hrefRE.FindAllStringSubmatch(body, -1) {
				// Other participants' week charts are the same code path as
				// the canary participants' weeks the start pages list.
				if !seen[m[1]] && !weekChartRE.MatchString(m[1]) {
					queue = append(queue, m[1])
				}
			}
		}
	}
	return n
}

func canaryStudyIDs(res demoload.Result) []string {
	var out []string
	for _, c := range res.Study.CanaryValues() {
		if c.Field == "study_id" {
			out = append(out, c.Value)
		}
	}
	return out
}

// leaksIn finds canaries in a page. Everywhere, a canary's exact text counts
// (a number made only of digits - a ZIP code, a phone number's digits - only as
// a whole number: "03601" inside the timestamp 1759403601000 is not a ZIP
// code). In the readable part of the page, deidtest.Leaks also finds reformatted
// phone numbers and dates; chart data and SVG geometry are left out of that
// looser search, where runs of unrelated numbers would match by chance.
// Plain string scanning, not regular expressions: the crawl reads hundreds of
// large pages.
func leaksIn(text string, canaries []string) []string {
	var out []string
	var words []string
	for _, c := range canaries {
		if isDigits(c) {
			if containsNumber(text, c) {
				out = append(out, c)
			}
			continue
		}
		if strings.Contains(text, c) {
			out = append(out, c)
			continue
		}
		words = append(words, c)
	}
	return append(out, deidtest.Leaks(withoutMachineData(text), words)...)
}

func isDigits(s string) bool {
	if s == "" {
		return false
	}
	for _, r := range s {
		if r < '0' || r > '9' {
			return false
		}
	}
	return true
}

func isDigitByte(b byte) bool { return b >= '0' && b <= '9' }

// containsNumber reports whether n stands in text as a whole number.
func containsNumber(text, n string) bool {
	for i := 0; ; {
		j := strings.Index(text[i:], n)
		if j < 0 {
			return false
		}
		at := i + j
		end := at + len(n)
		if (at == 0 || !isDigitByte(text[at-1])) && (end == len(text) || !isDigitByte(text[end])) {
			return true
		}
		i = at + 1
	}
}

// machineAttrs are attributes that hold machine data: chart options and SVG
// geometry.
var machineAttrs = []string{` data-chart="`, ` d="`, ` points="`, ` viewBox="`}

// withoutMachineData removes the values of machineAttrs from an HTML page.
func withoutMachineData(text string) string {
	var b strings.Builder
	for {
		first, which := -1, ""
		for _, a := range machineAttrs {
			if k := strings.Index(text, a); k >= 0 && (first < 0 || k < first) {
				first, which = k, a
			}
		}
		if first < 0 {
			b.WriteString(text)
			return b.String()
		}
		b.WriteString(text[:first])
		rest := text[first+len(which):]
		q := strings.IndexByte(rest, '"')
		if q < 0 {
			return b.String()
		}
		text = rest[q+1:]
	}
}
