package web

import (
	"fmt"
	"regexp"
	"slices"
	"strings"
	"testing"

	"cohortdesk/cohort"
)

var (
	hintCapsRE = regexp.MustCompile(`<span class="key" data-caps="([^"]*)"`)
	dataKeyRE  = regexp.MustCompile(`\bdata-(?:row-)?key="([^"]*)"`)
	navRE      = regexp.MustCompile(`(?s)<nav class="areas".*?</nav>`)
	tabKeyRE   = regexp.MustCompile(`(?s)<a[^>]*data-key="([^"]*)"[^>]*data-testid="nav-([a-z]+)"[^>]*>\s*<kbd class="tab-key"[^>]*>([^<]*)</kbd>`)
	dataRowRE  = regexp.MustCompile(`<tr\b[^>]*\bdata-row\b`)
)

// keyProblems compares a page's printed keys with the keys that work on
// it: every key an element carries is printed, the list keys are printed
// where the page has a list, and every area tab prints the number that
// opens it.
func keyProblems(html string) []string {
	if !strings.HasPrefix(strings.ToLower(strings.TrimSpace(html)), "<!doctype html>") {
		return nil
	}
	var out []string
	printed := map[string]bool{}
	for _, m := range hintCapsRE.FindAllStringSubmatch(html, -1) {
		for _, c := range strings.Fields(m[1]) {
			printed[c] = true
		}
	}
	nav := navRE.FindString(html)
	for _, m := range tabKeyRE.FindAllStringSubmatch(nav, -1) {
		if m[1] != m[3] || m[1] != areaKey(m[2]) {
			out = append(out, fmt.Sprintf("the %s tab is opened by %q but prints %q (its number is %q)", m[2], m[1], m[3], areaKey(m[2])))
		}
	}
	if n := strings.Count(nav, `data-testid="nav-`); n != len(tabKeyRE.FindAllString(nav, -1)) {
		out = append(out, fmt.Sprintf("%d tabs, not all with their number printed", n))
	}
	rest := strings.Replace(html, nav, "", 1)
	for _, m := range dataKeyRE.FindAllStringSubmatch(rest, -1) {
		if !printed[m[1]] {
			out = append(out, fmt.Sprintf("the key %q works here but the page does not print it", m[1]))
		}
	}
	// An empty list prints its keys too; the page's script leaves them out
	// of the line while there is no row (TestBrowserKeys checks it).
	if dataRowRE.MatchString(rest) && (!printed["l"] || !printed["↓"]) {
		out = append(out, "a list without its keys printed")
	}
	return out
}

// areaKey is the number of an area in the scheme.
func areaKey(key string) string {
	for _, a := range areas {
		if a.key == key {
			return a.shortcut
		}
	}
	return ""
}

// TestKeyProblemsCanFail: the check finds a key that works but is not
// printed, a list without its keys, and a tab that prints another number.
func TestKeyProblemsCanFail(t *testing.T) {
	page := func(nav, main string) string {
		return `<!doctype html><html><body><nav class="areas">` + nav + `</nav><main>` + main + `</main></body></html>`
	}
	tab := func(key, area, printed string) string {
		return `<a href="/x" data-key="` + key + `" aria-keyshortcuts="` + key + `" data-testid="nav-` + area + `"><kbd class="tab-key" aria-hidden="true">` + printed + `</kbd>X</a>`
	}
	hints := func(caps ...string) string {
		s := `<p class="keys no-print" data-testid="shortcuts">`
		for _, c := range caps {
			s += `<span class="key" data-caps="` + c + `"><kbd>` + c + `</kbd> x</span>`
		}
		return s + `</p>`
	}
	for _, tt := range []struct {
		html string
		want int
	}{
		{page(tab("2", "triage", "2"), hints("l", "↓ ↑", "Enter", "t")+`<table><tr data-row><td><button data-row-key="t">Take</button></td></tr></table>`), 0},
		{page(tab("2", "triage", "2"), `<table><tr data-row><td><button data-row-key="t">Take</button></td></tr></table>`), 2},
		{page(tab("2", "triage", "5"), ""), 1},
		{page(tab("7", "triage", "7"), ""), 1},
		{page(`<a href="/x" data-testid="nav-triage">Triage</a>`, ""), 1},
		{page("", hints("f")+`<input data-key="f">`), 0},
		{page("", hints("Enter")+`<table><tr data-row><td>x</td></tr></table>`), 1},
	} {
		if got := keyProblems(tt.html); len(got) != tt.want {
			t.Errorf("%.120q: problems %v, want %d", tt.html, got, tt.want)
		}
	}
}

// TestKeyHintsMatchThePages walks every page each role reaches by links
// from the start page on the demo study: every key an element carries is
// printed on the page, the list keys exactly where there is a list, the
// area numbers on the tabs. The printed keys follow the role: the steps of
// working a case only for roles that work cases, contact attempts and
// mailing the recorder only for those who reach participants, reading the
// ECG only for investigators, nothing of the sort for monitors.
func TestKeyHintsMatchThePages(t *testing.T) {
	a := newApp(t)
	loadDemo(t, a, 24)
	printedOn := map[cohort.Role]map[string]bool{}
	pages := 0
	for _, role := range cohort.Roles {
		printedOn[role] = map[string]bool{}
		c := a.signIn(role)
		start := []string{"/"}
		if role != cohort.Monitor {
			start = append(start, "/triage", "/cases")
		}
		crawl(t, a, c, start, 120, func(path, body string) {
			pages++
			for _, p := range keyProblems(body) {
				t.Errorf("%s as %s: %s", path, role, p)
			}
			for _, m := range hintCapsRE.FindAllStringSubmatch(body, -1) {
				printedOn[role][m[1]] = true
			}
		})
	}
	for role, want := range map[cohort.Role][]string{
		cohort.Coordinator:  {"t", "w", "c", "m", "x", "f", "+"},
		cohort.Investigator: {"t", "w", "x", "f", "r"},
		cohort.Admin:        {"t", "w", "c", "m", "x", "f", "+"},
		cohort.Monitor:      {"f"},
	} {
		got := printedOn[role]
		for _, k := range want {
			if !got[k] {
				t.Errorf("%s: no page prints the key %q", role, k)
			}
		}
		for _, k := range []string{"t", "w", "c", "m", "x", "r", "+"} {
			if got[k] && !slices.Contains(want, k) {
				t.Errorf("%s: a page prints the key %q for a step the role may not take", role, k)
			}
		}
	}
	if pages < 100 {
		t.Errorf("only %d pages walked", pages)
	}
}
