package web

import (
	"context"
	"net/http"
	"regexp"
	"strings"
	"testing"

	"cohortdesk/cmd/cohortdesk/demoload"
	"cohortdesk/cohort"
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

// crawl visits every page reachable from the start pages by links, as the
// given client, and calls visit with each body.
func crawl(t *testing.T, a *app, c *http.Client, start []string, limit int, visit func(path, body string)) int {
	t.Helper()
	seen := map[string]bool{}
	queue := append([]string(nil), start...)
	for len(queue) > 0 && len(seen) < limit {
		p := strings.ReplaceAll(queue[0], "&amp;", "&")
		queue = queue[1:]
		if seen[p] || strings.HasPrefix(p, "/assets/") {
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

// TestMonitorSeesNoPHI signs in as a monitor, visits every page and download
// reachable by links (and every canary participant's page directly), and finds
// none of the demo's planted canary identifiers. The same crawl as a
// coordinator does find them, which proves the canaries are there to be found.
func TestMonitorSeesNoPHI(t *testing.T) {
	a := newApp(t)
	res := loadDemo(t, a, 24)
	var canaries []string
	for _, c := range res.Study.CanaryValues() {
		if c.Field == "study_id" {
			continue // study IDs are not PHI inside the app; exports replace them
		}
		canaries = append(canaries, c.Value)
	}
	if len(canaries) < 10 {
		t.Fatalf("only %d canaries", len(canaries))
	}
	start := []string{"/", "/participants", "/participants.csv"}
	var pids []string
	rows, _ := a.store.Pool().Query(context.Background(), `SELECT id FROM participants p WHERE study_id = ANY($1)`, canaryStudyIDs(res))
	for rows.Next() {
		var id int64
		rows.Scan(&id)
		pids = append(pids, "/participants/"+itoa(id))
	}
	rows.Close()
	if len(pids) == 0 {
		t.Fatal("no canary participant in the small demo")
	}
	start = append(start, pids...)

	monitor := a.signIn(cohort.Monitor)
	pages := crawl(t, a, monitor, start, 400, func(path, body string) {
		if leaks := leaksIn(body, canaries); len(leaks) > 0 {
			t.Errorf("monitor page %s shows PHI: %v", path, leaks)
		}
	})
	t.Logf("monitor crawl: %d pages and downloads", pages)
	found := 0
	crawl(t, a, a.signIn(cohort.Coordinator), pids, 10, func(path, body string) {
		found += len(leaksIn(body, canaries))
	})
	if found == 0 {
		t.Fatal("a coordinator sees no canary either: the test cannot tell a leak")
	}
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
