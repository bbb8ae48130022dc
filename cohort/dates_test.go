package cohort

import (
	"testing"
	"time"
)

// The date style (ours, written in DEVELOPERS.md "Dates and times"): day,
// short month, year; weekday first where work is planned; 24-hour times with
// the zone's abbreviation. Zone abbreviations are the IANA time zone
// database's (America/Chicago is CST in winter, CDT in summer).
func TestDateStyle(t *testing.T) {
	d := Date{2026, time.December, 3}
	if got := d.Label(); got != "3 Dec 2026" {
		t.Errorf("Label = %q", got)
	}
	if got := d.DayLabel(); got != "Thu 3 Dec 2026" { // 3 December 2026 is a Thursday (from the calendar)
		t.Errorf("DayLabel = %q", got)
	}
	if (Date{}).Label() != "" || (Date{}).DayLabel() != "" {
		t.Error("the zero day has a label")
	}
	chicago, err := time.LoadLocation("America/Chicago")
	if err != nil {
		t.Fatal(err)
	}
	at := time.Date(2026, 12, 3, 20, 5, 0, 0, time.UTC)
	if got := TimeLabel(at, chicago); got != "3 Dec 2026 14:05 CST" {
		t.Errorf("TimeLabel winter = %q", got)
	}
	if got := TimeLabel(time.Date(2026, 7, 1, 3, 30, 0, 0, time.UTC), chicago); got != "30 Jun 2026 22:30 CDT" {
		t.Errorf("TimeLabel summer, the day before in Chicago = %q", got)
	}
	if got := ClockLabel(at, nil); got != "20:05 UTC" {
		t.Errorf("ClockLabel = %q", got)
	}
	if TimeLabel(time.Time{}, chicago) != "" {
		t.Error("the zero time has a label")
	}
	if got := DayRangeLabel(Date{2026, 11, 23}, Date{2026, 11, 29}); got != "Mon 23 Nov – Sun 29 Nov 2026" { // weekdays from the calendar
		t.Errorf("DayRangeLabel = %q", got)
	}
	if got := DayRangeLabel(Date{2026, 12, 28}, Date{2027, 1, 3}); got != "Mon 28 Dec 2026 – Sun 3 Jan 2027" {
		t.Errorf("DayRangeLabel across a year = %q", got)
	}
	for _, tt := range []struct {
		from, to Date
		want     string
	}{
		{Date{2026, 4, 29}, Date{2026, 5, 5}, "29 Apr – 5 May 2026"},
		{Date{2026, 12, 29}, Date{2027, 1, 4}, "29 Dec 2026 – 4 Jan 2027"},
		{d, d, "3 Dec 2026"},
	} {
		if got := DateRangeLabel(tt.from, tt.to); got != tt.want {
			t.Errorf("DateRangeLabel(%v, %v) = %q, want %q", tt.from, tt.to, got, tt.want)
		}
	}
}

func TestParseDay(t *testing.T) {
	want := Date{2026, time.December, 3}
	for _, s := range []string{"2026-12-03", "3 Dec 2026", " Thu 3 Dec 2026 ", "3 December 2026", "Thursday 3 December 2026"} {
		if got, err := ParseDay(s); err != nil || got != want {
			t.Errorf("ParseDay(%q) = %v, %v", s, got, err)
		}
	}
	for _, s := range []string{"12/3/2026", "3/12/2026", "", "31 Feb 2026"} {
		if _, err := ParseDay(s); err == nil {
			t.Errorf("ParseDay(%q) accepted an ambiguous or impossible day", s)
		}
	}
}
