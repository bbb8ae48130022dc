package web

import (
	"context"
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

// styledTime is a time of day in the date style.
var styledTime = regexp.MustCompile(`\d{1,2} (Jan|Feb|Mar|Apr|May|Jun|Jul|Aug|Sep|Oct|Nov|Dec) \d{4},? \d{2}:\d{2}(:\d{2})?`)

// zoneLabel is what must follow a time: a zone abbreviation (CST, UTC) or a
// numeric offset as Go writes one for zones without an abbreviation (-03).
var zoneLabel = regexp.MustCompile(`^ ([A-Z]{2,5}|[+-]\d{2,4})\b`)

// participantsTime is what follows a time written in the participant's own
// zone (web/when.go participantTime).
const participantsTime = ", the participant's time"

// zoneNames are the abbreviations a zone writes in winter and in summer
// (CST and CDT for America/Chicago), from the time zone database.
func zoneNames(loc *time.Location) map[string]bool {
	out := map[string]bool{}
	for _, m := range []time.Month{time.January, time.July} {
		name, _ := time.Date(time.Now().Year(), m, 1, 12, 0, 0, 0, time.UTC).In(loc).Zone()
		out[name] = true
	}
	return out
}

// dateStyleProblems lists the places in a page's text that write a date
// another way than the date style, or a time without its zone. With study
// zone names, a time must also be in the study's zone, unless it says it is
// the participant's: the one rule of DEVELOPERS.md "Dates and times" (the
// team's work in the study's zone, the participant's day in theirs).
func dateStyleProblems(text string, study ...map[string]bool) []string {
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
	for _, m := range styledTime.FindAllStringIndex(text, -1) {
		after := text[m[1]:min(len(text), m[1]+len(" ABCDE")+len(participantsTime))]
		z := zoneLabel.FindStringSubmatch(after)
		switch {
		case z == nil:
			out = append(out, "a time without its zone: …"+snippet(m[0], m[1])+"…")
		case len(study) > 0 && !study[0][z[1]] && !strings.HasPrefix(after[len(z[0]):], participantsTime):
			out = append(out, "a time in "+z[1]+", neither the study's zone nor said to be the participant's: …"+snippet(m[0], m[1])+"…")
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
	chicago, err := time.LoadLocation("America/Chicago")
	if err != nil {
		t.Fatal(err)
	}
	study := zoneNames(chicago)
	if !study["CST"] || !study["CDT"] { // America/Chicago's abbreviations in the IANA time zone database
		t.Fatalf("zone names of America/Chicago: %v", study)
	}
	for _, bad := range []string{"Saved 3 Dec 2026 20:05 UTC by", "at 3 Dec 2026 13:05 MST."} {
		if len(dateStyleProblems(bad, study)) == 0 {
			t.Errorf("%q: a time outside the study's zone passes", bad)
		}
	}
	for _, good := range []string{"Saved 3 Dec 2026 14:05 CST by", "taken 1 Jul 2026 09:00 CDT", "worn 3 Dec 2026 13:05 MST, the participant's time"} {
		if p := dateStyleProblems(good, study); len(p) > 0 {
			t.Errorf("%q: %v", good, p)
		}
	}
}

// TestOneDateStyleOnEveryPage opens every main page (a11yFixture) in the
// browser as each role that may open it and reads the page as a person does
// (its rendered text, charts included): no date may be written another way
// than the date style, no time without its zone, and no time in another
// zone than the study's unless it says it is the participant's (the
// finding: notes, overview, exports and audit wrote UTC beside a study in
// Chicago). Every date field shows
// the day it holds in the date style beside it, since the browser draws the
// field itself in its own locale's order.
func TestOneDateStyleOnEveryPage(t *testing.T) {
	a := newApp(t)
	pages := a11yFixture(t, a)
	st, err := a.store.StudySettings(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	study := zoneNames(st.Location())
	if study["UTC"] {
		t.Fatalf("the fixture's study works in %s: a time in UTC would not be caught", st.Location())
	}
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
				for _, p := range dateStyleProblems(tb.visibleText(), study) {
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
