package web

import (
	"encoding/json"
	"regexp"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"
)

// otherDateStyles are the ways of writing a date that the one date style
// (cohort/dates.go, DEVELOPERS.md "Dates and times") replaces: ISO days,
// numeric days with slashes (which read differently in different
// countries), and the month before the day.
var otherDateStyles = []struct {
	name string
	re   *regexp.Regexp
}{
	{"YYYY-MM-DD", regexp.MustCompile(`\b\d{4}-\d{2}-\d{2}\b`)},
	{"numeric day with slashes", regexp.MustCompile(`\b\d{1,2}/\d{1,2}/\d{2,4}\b`)},
	{"month before the day", regexp.MustCompile(`\b(Jan|Feb|Mar|Apr|May|Jun|Jul|Aug|Sep|Oct|Nov|Dec)[a-z]*\.? \d{1,2}(st|nd|rd|th)?\b`)},
}

// styledTime is a time of day in the date style, and what follows it.
var styledTime = regexp.MustCompile(`\d{1,2} (Jan|Feb|Mar|Apr|May|Jun|Jul|Aug|Sep|Oct|Nov|Dec) \d{4},? \d{2}:\d{2}(:\d{2})?(.{0,6})`)

// zoneLabel is what must follow a time: a zone abbreviation (CST, UTC) or a
// numeric offset as Go writes one for zones without an abbreviation (-03).
var zoneLabel = regexp.MustCompile(`^ ([A-Z]{2,5}|[+-]\d{2,4})\b`)

// dateStyleProblems lists the places in a page's text that write a date
// another way than the date style, or a time without its zone.
func dateStyleProblems(text string) []string {
	var out []string
	snippet := func(i, j int) string {
		lo, hi := max(0, i-30), min(len(text), j+30)
		return strings.ReplaceAll(text[lo:hi], "\n", " ⏎ ")
	}
	for _, st := range otherDateStyles {
		for _, loc := range st.re.FindAllStringIndex(text, 5) {
			out = append(out, st.name+": …"+snippet(loc[0], loc[1])+"…")
		}
	}
	for _, m := range styledTime.FindAllStringSubmatchIndex(text, -1) {
		after := text[m[6]:m[7]]
		if !zoneLabel.MatchString(after) {
			out = append(out, "a time without its zone: …"+snippet(m[0], m[1])+"…")
		}
	}
	return out
}

// TestDateStyleProblemsFinds shows the scanner finds what it is for, so a
// clean page means something.
func TestDateStyleProblemsFinds(t *testing.T) {
	for _, bad := range []string{"Enrolled 2026-04-27", "due 12/02/2026", "Apr 29 – May 5", "Flagged 3 Dec 2026 14:05", "at 3 Dec 2026 14:05\n"} {
		if len(dateStyleProblems(bad)) == 0 {
			t.Errorf("%q: no problem found", bad)
		}
	}
	for _, good := range []string{"Enrolled 27 Apr 2026", "due Wed 2 Dec 2026", "29 Apr – 5 May 2026", "Flagged 3 Dec 2026 14:05 CST", "at 3 Dec 2026 14:05 -03",
		"Dec 2026", "QRW-0019-B", "week 12", "3 of 12 weeks"} {
		if p := dateStyleProblems(good); len(p) > 0 {
			t.Errorf("%q: %v", good, p)
		}
	}
}

// TestOneDateStyleOnEveryPage opens every main page (a11yFixture) in the
// browser as each role that may open it and reads the page as a person does
// (its rendered text, charts included): no date may be written another way
// than the date style, and no time without its zone. Every date field shows
// the day it holds in the date style beside it, since the browser draws the
// field itself in its own locale's order.
func TestOneDateStyleOnEveryPage(t *testing.T) {
	a := newApp(t)
	pages := a11yFixture(t, a)
	for _, role := range cohort.Roles {
		t.Run(string(role), func(t *testing.T) {
			t.Parallel()
			tb := newTab(t, a, 5*time.Minute)
			tb.signIn(role)
			for _, pg := range pages {
				acc, _ := a.srv.accessOf("GET", pg.pattern)
				if !acc.allows(role) {
					continue
				}
				tb.open(pg.path, "main")
				for _, p := range dateStyleProblems(tb.visibleText()) {
					t.Errorf("%s as %s: %s", pg.name, role, p)
				}
				var fields []struct{ Value, Echo string }
				raw := tb.eval(`JSON.stringify(Array.from(document.querySelectorAll('input[type=date], input[type=datetime-local]')).map(el => ({
					value: el.value, echo: el.nextElementSibling && el.nextElementSibling.classList.contains('date-echo') ? el.nextElementSibling.textContent : '<none>'})))`)
				if err := json.Unmarshal([]byte(raw), &fields); err != nil {
					t.Fatalf("%s: %v", pg.name, err)
				}
				for _, f := range fields {
					d, err := cohort.ParseDate(f.Value[:min(len(f.Value), 10)])
					if err != nil {
						continue // an empty field shows nothing
					}
					if !strings.HasPrefix(f.Echo, d.DayLabel()) {
						t.Errorf("%s as %s: a date field holding %s shows %q beside it, want %q", pg.name, role, f.Value, f.Echo, d.DayLabel())
					}
				}
			}
		})
	}
}
