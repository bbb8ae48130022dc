package outreach

import (
	"fmt"
	"strings"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
)

// Counts are one person's morning summary: how many of their cases are
// overdue or due today, and how many new flags nobody has taken on. Counts
// only: the summary leaves the building by e-mail, so it names nobody.
type Counts struct {
	Overdue, DueToday, NewUnowned int
}

// DefaultSummaryAt is when the morning summary goes, in the study's zone.
const DefaultSummaryAt Clock = 7 * 60

// NextMorning is the first moment after now that falls at the clock time at
// on a working day of the study calendar cal (in the calendar's zone).
func NextMorning(cal followup.Calendar, loc *time.Location, now time.Time, at Clock) time.Time {
	local := now.In(loc)
	d := cohort.DateOf(local)
	for i := 0; i < 400; i++ {
		t := time.Date(d.Year, d.Month, d.Day, int(at)/60, int(at)%60, 0, 0, loc)
		if t.After(now) && cal.IsWorkingDay(d) {
			return t
		}
		d = d.AddDays(1)
	}
	return time.Time{}
}

// A morning summary the mail server put off (a temporary refusal) is tried
// again every SummaryRetryEvery while the morning lasts: for SummaryRetryFor
// after the summary time, on the same day (ours: a summary of the day's work
// is worth sending late in the morning, not in the afternoon).
const (
	SummaryRetryEvery = 15 * time.Minute
	SummaryRetryFor   = 4 * time.Hour
)

// NextSummaryRun is when the morning job runs next after a run at now:
// SummaryRetryEvery later when some summary was put off and that is still
// within SummaryRetryFor of today's summary time, else the next morning
// (NextMorning).
func NextSummaryRun(cal followup.Calendar, loc *time.Location, now time.Time, at Clock, putOff bool) time.Time {
	if putOff {
		d := cohort.DateOf(now.In(loc))
		start := time.Date(d.Year, d.Month, d.Day, int(at)/60, int(at)%60, 0, 0, loc)
		retry := now.Add(SummaryRetryEvery)
		if cal.IsWorkingDay(d) && !retry.After(start.Add(SummaryRetryFor)) && cohort.DateOf(retry.In(loc)) == d {
			return retry
		}
	}
	return NextMorning(cal, loc, now, at)
}

// SummaryMail words the morning summary for a person named name on day:
// the counts and a link to triage; no study ID, name or detail of any
// participant.
func SummaryMail(name, study string, day cohort.Date, c Counts, triageURL string) (subject, body string) {
	subject = "Your follow-up work for " + WrittenDay(day)
	var b strings.Builder
	fmt.Fprintf(&b, "Good morning %s,\n\n", name)
	fmt.Fprintf(&b, "Your follow-up work in %s today:\n\n", orStudy(study))
	fmt.Fprintf(&b, "  %s of yours overdue\n", cohort.Plural(c.Overdue, "case"))
	fmt.Fprintf(&b, "  %s of yours due today\n", cohort.Plural(c.DueToday, "case"))
	fmt.Fprintf(&b, "  %s that nobody has taken on yet\n\n", cohort.Plural(c.NewUnowned, "new flag"))
	if triageURL != "" {
		fmt.Fprintf(&b, "Open triage: %s\n\n", triageURL)
	}
	b.WriteString("This summary holds counts only. You receive it because you asked for it on the triage page, where you can also turn it off.\n")
	return subject, b.String()
}

func orStudy(s string) string {
	if strings.TrimSpace(s) == "" {
		return "the study"
	}
	return s
}
