package web

import (
	"context"
	"encoding/base64"
	"fmt"
	"regexp"
	"strconv"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/demo"
)

// The monitors' fixture: the demo with its canary participants, confirmed
// cases whose free text holds the canaries' names and phones
// (demoCanaries), and on top of it staff free text and dates planted where
// monitors once saw them: a note on every canary participant and a
// withdrawal of one of them whose reason repeats the canary's name, phone,
// birth date, street and ZIP code.

// freeTextMarker is in every planted note and reason, so the test can tell a
// shown note from a canary value shown some other way.
const freeTextMarker = "STAFF-FREE-TEXT-7731"

// monitorFixture is what the monitor tests plant and look for.
type monitorFixture struct {
	study    *demo.Study
	pids     map[string]int64 // canary study ID -> participant id
	canaries []string         // values monitors must never see: PHI and planted free text
	planted  []cohort.Date    // the canary participants' own dates
	today    cohort.Date      // the app's today (UTC)
}

func plantMonitorFixture(t *testing.T, a *app) monitorFixture {
	t.Helper()
	study, _, pids, _ := demoCanaries(t, a)
	f := monitorFixture{study: study, pids: pids, canaries: monitorCanaries(study), today: cohort.DateOf(a.srv.now().UTC())}
	f.canaries = append(f.canaries, freeTextMarker)
	ctx := context.Background()
	coord := a.users[cohort.Coordinator].Actor("127.0.0.1", "phi-test")
	withdrawn := false
	for sid, pid := range pids {
		vals := map[string]string{}
		for _, c := range study.CanaryValues() {
			if c.StudyID == sid {
				vals[c.Field] = c.Value
			}
		}
		text := fmt.Sprintf("%s: spoke with %s on %s, born %s (%s), lives at %s, %s %s", freeTextMarker, vals["full_name"], vals["phone"],
			vals["birth_date"], vals["birth_date_us"], vals["street"], vals["city"], vals["zip"])
		if err := a.store.AddNote(ctx, coord, pid, text); err != nil {
			t.Fatal(err)
		}
		p, err := a.store.Participant(ctx, pid)
		if err != nil {
			t.Fatal(err)
		}
		f.planted = append(f.planted, p.EnrolledOn)
		weeks := f.today.DaysSince(p.EnrolledOn)/7 + 1
		for w := 0; w < weeks; w++ {
			f.planted = append(f.planted, p.EnrolledOn.AddDays(7*w), p.EnrolledOn.AddDays(7*w+6))
		}
		if !withdrawn {
			on := f.today.AddDays(-9)
			if _, err := a.store.Withdraw(ctx, coord, pid, on, text, p.Version); err != nil {
				t.Fatal(err)
			}
			f.planted = append(f.planted, on)
			withdrawn = true
		}
	}
	return f
}

// Dates as pages, charts and files could write them.
var (
	isoDateRE  = regexp.MustCompile(`\b(\d{4})-(\d{2})-(\d{2})`)
	usDateRE   = regexp.MustCompile(`\b(\d{1,2})/(\d{1,2})/(\d{4})\b`)
	monthNames = `(Jan(?:uary)?|Feb(?:ruary)?|Mar(?:ch)?|Apr(?:il)?|May|June?|July?|Aug(?:ust)?|Sep(?:t(?:ember)?)?|Oct(?:ober)?|Nov(?:ember)?|Dec(?:ember)?)`
	// "16 Nov 2026", "Mon 16 Nov 2026", "November 16, 2026", and the
	// timeline's old "Nov 16" without a year.
	dayMonthRE = regexp.MustCompile(`\b(\d{1,2}) ` + monthNames + `\.? (\d{4})\b`)
	monthDayRE = regexp.MustCompile(`\b` + monthNames + `\.? (\d{1,2})\b(,? (\d{4}))?`)
	afterRE    = regexp.MustCompile(`after=([A-Za-z0-9_-]+)`)
	periodRE   = regexp.MustCompile(`\b(from|to)=\d{4}-\d{2}-\d{2}`)
)

var monthOf = map[string]time.Month{"Jan": 1, "Feb": 2, "Mar": 3, "Apr": 4, "May": 5, "Jun": 6, "Jul": 7, "Aug": 8, "Sep": 9, "Oct": 10, "Nov": 11, "Dec": 12}

// dateLeak is a date found where it should not be, with how it was written.
type dateLeak struct{ found, why string }

// dateLeaks finds the dates a response to a monitor may not hold. A monitor
// may see today (the "as of" of a page; a day either side for time zones),
// future days (projections) and the days of an enrolment period the monitor
// chose (the request's own from and to, and the report's ready-made periods
// in its links); every other calendar date, in any common form, is a leak,
// and so is every earlier epoch-millisecond timestamp, the charts' way of
// writing a reading's time. The keyset cursors of page links are decoded and searched
// too.
func dateLeaks(body, requestQuery string, today cohort.Date) []dateLeak {
	var out []dateLeak
	for _, m := range afterRE.FindAllStringSubmatch(body, -1) {
		if b, err := base64.RawURLEncoding.DecodeString(m[1]); err == nil {
			body += "\n" + string(b)
		}
	}
	chosen := map[string]bool{}
	for _, m := range isoDateRE.FindAllString(requestQuery, -1) {
		chosen[m] = true
	}
	body = periodRE.ReplaceAllString(body, "$1=(period)")
	ok := func(d cohort.Date, text string) bool {
		return chosen[d.String()] || d.DaysSince(today) >= -1
	}
	check := func(y, mo, d int, text, why string) {
		if mo < 1 || mo > 12 || d < 1 || d > 31 || y < 1900 || y > 2200 {
			return
		}
		if day := (cohort.Date{Year: y, Month: time.Month(mo), Day: d}); !ok(day, text) {
			out = append(out, dateLeak{text, why})
		}
	}
	for _, m := range isoDateRE.FindAllStringSubmatch(body, -1) {
		y, _ := strconv.Atoi(m[1])
		mo, _ := strconv.Atoi(m[2])
		d, _ := strconv.Atoi(m[3])
		check(y, mo, d, m[0], "ISO date")
	}
	for _, m := range usDateRE.FindAllStringSubmatch(body, -1) {
		mo, _ := strconv.Atoi(m[1])
		d, _ := strconv.Atoi(m[2])
		y, _ := strconv.Atoi(m[3])
		check(y, mo, d, m[0], "month/day/year")
		check(y, d, mo, m[0], "day/month/year")
	}
	for _, m := range dayMonthRE.FindAllStringSubmatch(body, -1) {
		d, _ := strconv.Atoi(m[1])
		y, _ := strconv.Atoi(m[3])
		check(y, int(monthOf[m[2][:3]]), d, m[0], "day month year")
	}
	for _, m := range monthDayRE.FindAllStringSubmatch(body, -1) {
		d, _ := strconv.Atoi(m[2])
		if m[4] == "" {
			if d >= 1 && d <= 31 {
				out = append(out, dateLeak{m[0], "month and day"})
			}
			continue
		}
		y, _ := strconv.Atoi(m[4])
		check(y, int(monthOf[m[1][:3]]), d, m[0], "month day, year")
	}
	clock := time.Now().Add(-24 * time.Hour) // the browser's own time: the chart library numbers its elements by it
	for _, run := range digitRunsOf(body, 13) {
		ms, _ := strconv.ParseInt(run, 10, 64)
		if at := time.UnixMilli(ms).UTC(); at.Year() >= 2000 && at.Year() <= 2100 && at.Before(clock) && !ok(cohort.DateOf(at), run) {
			out = append(out, dateLeak{run, "epoch milliseconds (" + at.Format(time.RFC3339) + ")"})
		}
	}
	return out
}

// digitRunsOf lists the maximal runs of exactly n digits in s.
func digitRunsOf(s string, n int) []string {
	var out []string
	for i := 0; i < len(s); {
		if !isDigitByte(s[i]) {
			i++
			continue
		}
		j := i
		for j < len(s) && isDigitByte(s[j]) {
			j++
		}
		if j-i == n {
			out = append(out, s[i:j])
		}
		i = j
	}
	return out
}

// plantedDateForms writes the planted dates in the forms the pages and
// files of this app used for them, so a control run can find them.
func plantedDateForms(ds []cohort.Date) []string {
	var out []string
	for _, d := range ds {
		t := time.Date(d.Year, d.Month, d.Day, 12, 0, 0, 0, time.UTC)
		out = append(out, d.String(), t.Format("Mon 2 Jan 2006"), t.Format("Jan 2"))
	}
	return out
}

// containsAny lists the needles found in text.
func containsAny(text string, needles []string) []string {
	var out []string
	for _, n := range needles {
		if strings.Contains(text, n) {
			out = append(out, n)
		}
	}
	return out
}
