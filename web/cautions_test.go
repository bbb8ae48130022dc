package web

import (
	"encoding/json"
	"fmt"
	"net/http"
	"net/url"
	"regexp"
	"slices"
	"strings"
	"testing"

	"cohortdesk/cohort"
	"cohortdesk/views/components"
)

// flagWords are the words by which a page shows a flag, a hint, a verdict or
// a figure derived from them: the screen's verdicts and flags, irregularity,
// the beat-interval hint, the over-read's AF and the recorder's own reading,
// the flag's PPV, external models' verdicts. A verdict shown alone in a cell
// or a badge counts too (verdictCell).
var flagWords = regexp.MustCompile(`(?i)\b(flag|flags|flagged|screen-positive|screen-negative|(positive|negative) weeks?|positive or negative|verdicts?|irregular|hint|atrial fibrillation|device suggests|PPV|AF confirmed)\b`)

// negativeWords show a negative screening result; verdictCell is a verdict
// standing alone as an element's text.
var (
	negativeWords = regexp.MustCompile(`(?i)\b(screen-negative|negative weeks?|positive or negative)\b`)
	verdictCell   = regexp.MustCompile(`(?i)>\s*(positive|negative|insufficient)\s*<`)
	negativeCell  = regexp.MustCompile(`(?i)>\s*negative\s*<`)
)

var (
	mainRE       = regexp.MustCompile(`(?s)<main\b.*?</main>`)
	cautionsRE   = regexp.MustCompile(`(?s)<details class="cautions"[^>]*>.*?</details>`)
	negNoteRE    = regexp.MustCompile(`(?s)<p class="negative-note"[^>]*>.*?</p>`)
	scriptRE     = regexp.MustCompile(`(?s)<script\b.*?</script>`)
	attrMarkerRE = regexp.MustCompile(`<details\b[^>]*\b` + components.CautionsMarker + `\b`)
)

// cautionProblems says what a page's HTML lacks: the cautions component
// where the main content shows flag or verdict words, and the note that a
// negative week does not rule out AF where it shows a negative result. The
// words inside the component and the note do not count.
func cautionProblems(html string) []string {
	if !strings.HasPrefix(strings.ToLower(strings.TrimSpace(html)), "<!doctype html>") {
		return nil // a download
	}
	main := mainRE.FindString(html)
	main = scriptRE.ReplaceAllString(main, " ")
	main = cautionsRE.ReplaceAllString(main, " ")
	main = negNoteRE.ReplaceAllString(main, " ")
	text := stripTags(main)
	var out []string
	flag := flagWords.FindString(text)
	if flag == "" {
		flag = verdictCell.FindString(main)
	}
	if flag != "" && !attrMarkerRE.MatchString(html) {
		out = append(out, fmt.Sprintf("shows %q but not the cautions component", flag))
	}
	neg := negativeWords.FindString(text)
	if neg == "" {
		neg = negativeCell.FindString(main)
	}
	if neg != "" && !strings.Contains(html, cohort.NegativeWeekCaution) {
		out = append(out, fmt.Sprintf("shows %q but not %q", neg, cohort.NegativeWeekCaution))
	}
	return out
}

// TestCautionProblemsCanFail: the check finds a flag shown without the
// component and a negative week shown without its note, and passes a page
// with both.
func TestCautionProblemsCanFail(t *testing.T) {
	page := func(main string) string { return "<!doctype html><html><body><main>" + main + "</main></body></html>" }
	for _, tt := range []struct {
		html string
		want int
	}{
		{page(`<h1>Cases</h1><p>12 flagged weeks</p>`), 1},
		{page(`<span class="badge">negative</span>`), 2},
		{page(`<p>Accounts</p>`), 0},
		{page(`<p>line 9: value "-40" for steps is negative or above 2147483647</p>`), 0},
		{page(`<td>positive</td>`), 1},
		{page(`<p>4 negative weeks</p>`), 2},
		{page(`<details class="cautions" data-cautions><summary>flag</summary></details><p>3 flagged</p>`), 0},
		{page(`<details class="cautions" data-cautions></details><span>negative</span><p class="negative-note">` + cohort.NegativeWeekCaution + `</p>`), 0},
		{page(`<details class="cautions" data-cautions></details><span>negative</span>`), 1},
		{"week,verdict\n3,negative\n", 0},
	} {
		if got := cautionProblems(tt.html); len(got) != tt.want {
			t.Errorf("%.80q: problems %v, want %d", tt.html, got, tt.want)
		}
	}
}

// cautionPages are the pages to walk: every page of the accessibility
// fixture, and those it leaves out (a cascade box, the weekly report, finding
// a participant to refer, the withdrawal form).
func cautionPages(t *testing.T, a *app) []a11yPage {
	t.Helper()
	pages := a11yFixture(t, a)
	var pid int64
	for _, p := range pages {
		if p.pattern == "/participants/{id}" {
			fmt.Sscanf(p.path, "/participants/%d", &pid)
		}
	}
	return append(pages,
		a11yPage{"cascade box", "/progress/cascade/{box}", "/progress/cascade/screen_positive"},
		a11yPage{"weekly report", "/progress/report", "/progress/report"},
		a11yPage{"find a participant to refer", "/referrals/new", "/referrals/new"},
		a11yPage{"withdrawal", "/participants/{id}/withdraw", fmt.Sprintf("/participants/%d/withdraw", pid)},
	)
}

// TestCautionsWhereFlagsShow walks every page of the route table, with real
// ids on the demo study, as every role the table lets in, then every page
// each role reaches by links from the start page; every page whose main
// content shows flag or verdict words must carry the cautions component, and
// every page showing a negative result the note that a negative week does
// not rule out AF. A page route missing from the walk fails too, so a new
// page cannot slip past.
func TestCautionsWhereFlagsShow(t *testing.T) {
	a := newApp(t)
	pages := cautionPages(t, a)
	walked := map[string]bool{}
	for _, p := range pages {
		walked[p.pattern] = true
	}
	for _, rt := range a.srv.routeTable {
		download := strings.HasSuffix(rt.pattern, ".csv") || strings.HasSuffix(rt.pattern, ".zip") || strings.HasSuffix(rt.pattern, "/pdf")
		if rt.method == "GET" && !rt.access.public && !rt.access.scrape && !download && !walked[rt.pattern] {
			t.Errorf("GET %s is not walked: add a page for it to cautionPages", rt.pattern)
		}
	}
	checked, flagged := 0, 0
	check := func(role cohort.Role, path, body string) {
		t.Helper()
		checked++
		if main := mainRE.FindString(body); flagWords.MatchString(stripTags(main)) || verdictCell.MatchString(main) {
			flagged++
		}
		for _, p := range cautionProblems(body) {
			t.Errorf("%s as %s: %s", path, role, p)
		}
	}
	for _, role := range cohort.Roles {
		c := a.signIn(role)
		for _, p := range pages {
			if acc, _ := a.srv.accessOf("GET", p.pattern); !acc.allows(role) {
				continue
			}
			res, body := a.get(c, p.path)
			// Finding a participant without a study ID shows the exports
			// page with the field refused.
			if res.StatusCode != http.StatusOK && (p.pattern != "/referrals/new" || res.StatusCode != http.StatusUnprocessableEntity) {
				t.Errorf("%s (%s) as %s: status %d", p.name, p.path, role, res.StatusCode)
				continue
			}
			check(role, p.path, body)
		}
		crawl(t, a, c, []string{"/"}, 250, func(path, body string) { check(role, path, body) })
	}
	if flagged < 20 {
		t.Errorf("only %d of %d pages show flag words: is the demo there?", flagged, checked)
	}
	t.Logf("%d pages checked, %d show flag or verdict words", checked, flagged)
}

// TestExportsCarryTheCautions: the weekly report's CSV bundle, the
// de-identified dataset and a batch of referral summaries each hold the
// cautions as a text file, word for word; the bundles with a file list name
// it with its digest, and the dataset's read-me points to it.
func TestExportsCarryTheCautions(t *testing.T) {
	a := newApp(t)
	demoCanaries(t, a)
	inv, coord := a.signIn(cohort.Investigator), a.signIn(cohort.Coordinator)
	get := func(c *http.Client, method, path string) map[string][]byte {
		t.Helper()
		var res *http.Response
		var b []byte
		if method == "POST" {
			res, b = a.post(c, path, url.Values{"paper": {"a4"}})
		} else {
			var s string
			res, s = a.get(c, path)
			b = []byte(s)
		}
		if res.StatusCode != http.StatusOK || res.Header.Get("Content-Type") != "application/zip" {
			t.Fatalf("%s %s: status %d %s", method, path, res.StatusCode, res.Header.Get("Content-Type"))
		}
		return unzip(t, b)
	}
	for _, tt := range []struct {
		name, method, path string
		c                  *http.Client
		listed             bool
	}{
		{"weekly report bundle", "GET", "/progress/report.zip", inv, true},
		{"dataset export", "POST", "/exports/dataset", inv, true},
		{"referral batch", "POST", "/exports/referrals", coord, false},
	} {
		files := get(tt.c, tt.method, tt.path)
		got, ok := files[cohort.CautionsFile]
		if !ok || string(got) != cohort.CautionsText() {
			t.Errorf("%s: %s missing or not the cautions (%d bytes)", tt.name, cohort.CautionsFile, len(got))
			continue
		}
		if tt.listed {
			var man struct {
				Files []manifestFile `json:"files"`
			}
			if err := json.Unmarshal(files["manifest.json"], &man); err != nil {
				t.Fatalf("%s: manifest: %v", tt.name, err)
			}
			if !slices.ContainsFunc(man.Files, func(f manifestFile) bool { return f.Name == cohort.CautionsFile && f.SHA256 == sha256Hex(got) }) {
				t.Errorf("%s: the manifest does not list %s with its digest", tt.name, cohort.CautionsFile)
			}
		}
		if readme, ok := files["README.txt"]; ok && !strings.Contains(string(readme), cohort.CautionsFile) {
			t.Errorf("%s: the read-me does not point to %s", tt.name, cohort.CautionsFile)
		}
	}
}

// crawl visits every page reachable from the start pages by links (plain
// requests, as a person's clicks make them), as the given client, and calls
// visit with each body.
func crawl(t *testing.T, a *app, c *http.Client, start []string, limit int, visit func(path, body string)) int {
	t.Helper()
	seen := map[string]bool{}
	queue := append([]string(nil), start...)
	for len(queue) > 0 && len(seen) < limit {
		p := strings.ReplaceAll(queue[0], "&amp;", "&")
		queue = queue[1:]
		if seen[p] || strings.HasPrefix(p, "/assets/") || p == "/signout" {
			continue
		}
		seen[p] = true
		res, body := a.get(c, p)
		if res.StatusCode >= 500 {
			t.Errorf("%s: status %d", p, res.StatusCode)
		}
		visit(p, body)
		for _, m := range hrefRE.FindAllStringSubmatch(body, -1) {
			if !seen[m[1]] {
				queue = append(queue, m[1])
			}
		}
	}
	return len(seen)
}
