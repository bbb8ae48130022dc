package followup

import (
	"strings"
	"testing"
	"time"
	_ "time/tzdata" // the tz database inside the test binary, so zone tests never depend on the host

	"cohortdesk/cohort"
)

func mustLoad(tb testing.TB, name string) *time.Location {
	tb.Helper()
	loc, err := time.LoadLocation(name)
	if err != nil {
		tb.Fatalf("load zone %s: %v", name, err)
	}
	return loc
}

func day(tb testing.TB, s string) cohort.Date {
	tb.Helper()
	d, err := cohort.ParseDate(s)
	if err != nil {
		tb.Fatal(err)
	}
	return d
}

// mustWeekday guards the hand-written calendars in these tests: the weekday
// comes from Go's time package (a reference library, computed).
func mustWeekday(tb testing.TB, s string, want time.Weekday) cohort.Date {
	tb.Helper()
	d := day(tb, s)
	if got := time.Date(d.Year, d.Month, d.Day, 12, 0, 0, 0, time.UTC).Weekday(); got != want {
		tb.Fatalf("%s is a %s, the test assumed %s", s, got, want)
	}
	return d
}

// at is a local wall-clock moment in loc, written "2026-03-06 15:04".
func at(tb testing.TB, loc *time.Location, s string) time.Time {
	tb.Helper()
	t, err := time.ParseInLocation("2006-01-02 15:04", s, loc)
	if err != nil {
		tb.Fatal(err)
	}
	return t
}

// endOfDay is the expected deadline for a due day: local midnight after it,
// built directly with time.Date, independently of the code under test.
func endOfDay(d cohort.Date, loc *time.Location) time.Time {
	return time.Date(d.Year, d.Month, d.Day+1, 0, 0, 0, 0, loc)
}

func TestAddWorkingDays(t *testing.T) {
	berlin := mustLoad(t, "Europe/Berlin")
	// A fictional study calendar: Friday 2026-04-03 is a holiday right before
	// a weekend; Wednesday 2026-04-15 is a mid-week holiday. Expected due days
	// were counted by hand (computed; weekdays checked with mustWeekday, and the
	// same rule is re-derived independently in TestCalendarAgainstReference).
	mustWeekday(t, "2026-04-03", time.Friday)
	mustWeekday(t, "2026-04-15", time.Wednesday)
	mustWeekday(t, "2026-04-04", time.Saturday)
	cal := NewCalendar(berlin, day(t, "2026-04-03"), day(t, "2026-04-15"))
	withMonday := NewCalendar(berlin, day(t, "2026-04-03"), day(t, "2026-04-06"))

	tests := []struct {
		name string
		cal  Calendar
		from string
		n    int
		want string // due day
	}{
		{"weekday, n=1 is the next day", cal, "2026-04-07 09:00", 1, "2026-04-08"},
		{"weekday, n=2", cal, "2026-04-07 09:00", 2, "2026-04-09"},
		{"n=0 is the same working day", cal, "2026-04-07 23:59", 0, "2026-04-07"},
		{"negative n acts as 0", cal, "2026-04-07 09:00", -3, "2026-04-07"},
		{"Friday, n=1 skips the weekend", cal, "2026-04-10 16:00", 1, "2026-04-13"},
		{"Thursday before a holiday Friday, n=1", cal, "2026-04-02 10:00", 1, "2026-04-06"},
		{"Thursday before a holiday Friday, n=2", cal, "2026-04-02 10:00", 2, "2026-04-07"},
		{"flag on the holiday Friday, n=0", cal, "2026-04-03 10:00", 0, "2026-04-06"},
		{"flag on the holiday Friday, n=1", cal, "2026-04-03 10:00", 1, "2026-04-06"},
		{"holiday Friday and Monday, n=1", withMonday, "2026-04-02 10:00", 1, "2026-04-07"},
		{"flag on Saturday, n=0", cal, "2026-04-11 08:00", 0, "2026-04-13"},
		{"flag on Saturday, n=1", cal, "2026-04-11 08:00", 1, "2026-04-13"},
		{"flag on Sunday, n=2", cal, "2026-04-12 22:00", 2, "2026-04-14"},
		{"mid-week holiday skipped", cal, "2026-04-14 12:00", 1, "2026-04-16"},
		{"flag on the mid-week holiday, n=0", cal, "2026-04-15 12:00", 0, "2026-04-16"},
		{"ten working days over a weekend and a holiday", cal, "2026-04-08 12:00", 10, "2026-04-23"},
		{"midnight belongs to the new day", cal, "2026-04-08 00:00", 1, "2026-04-09"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			want := day(t, tt.want)
			got := tt.cal.AddWorkingDays(at(t, berlin, tt.from), tt.n)
			if wantT := endOfDay(want, berlin); !got.Equal(wantT) {
				t.Errorf("due %s, want %s", got, wantT)
			}
			if dd := tt.cal.DueDay(got); dd != want {
				t.Errorf("DueDay = %s, want %s", dd, want)
			}
			if !tt.cal.IsWorkingDay(want) {
				t.Errorf("due day %s is not a working day", want)
			}
		})
	}
}

// TestAddWorkingDaysTimeZones: one instant is Thursday evening in New York
// and already Friday morning in Berlin, so the same flag is due on different
// days depending on the study's zone.
func TestAddWorkingDaysTimeZones(t *testing.T) {
	ny, berlin := mustLoad(t, "America/New_York"), mustLoad(t, "Europe/Berlin")
	mustWeekday(t, "2026-03-05", time.Thursday)
	instant := time.Date(2026, 3, 6, 3, 30, 0, 0, time.UTC)
	tests := []struct {
		name    string
		loc     *time.Location
		wantDay string // the flag's day in that zone
		wantDue string // due day with n = 1
	}{
		{"New York (UTC-5 in March before the change)", ny, "2026-03-05", "2026-03-06"},
		{"Berlin (UTC+1)", berlin, "2026-03-06", "2026-03-09"},
		{"nil location means UTC", nil, "2026-03-06", "2026-03-09"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			cal := NewCalendar(tt.loc)
			loc := tt.loc
			if loc == nil {
				loc = time.UTC
			}
			if got := cal.DateOf(instant); got != day(t, tt.wantDay) {
				t.Errorf("DateOf = %s, want %s", got, tt.wantDay)
			}
			got := cal.AddWorkingDays(instant, 1)
			if want := endOfDay(day(t, tt.wantDue), loc); !got.Equal(want) {
				t.Errorf("due %s, want %s", got.In(loc), want)
			}
		})
	}
}

// dstChanges finds the days in year on which loc's UTC offset changes, from
// the tz database itself, by stepping hour by hour through the year.
func dstChanges(tb testing.TB, loc *time.Location, year int) []cohort.Date {
	tb.Helper()
	var out []cohort.Date
	t := time.Date(year, 1, 1, 0, 0, 0, 0, time.UTC)
	end := time.Date(year+1, 1, 1, 0, 0, 0, 0, time.UTC)
	_, prev := t.In(loc).Zone()
	for ; t.Before(end); t = t.Add(time.Hour) {
		if _, off := t.In(loc).Zone(); off != prev {
			out = append(out, cohort.DateOf(t.In(loc)))
			prev = off
		}
	}
	return out
}

// nthSunday is the date of the n-th Sunday of a month (n = -1: the last).
func nthSunday(year int, month time.Month, n int) cohort.Date {
	if n < 0 {
		d := time.Date(year, month+1, 0, 12, 0, 0, 0, time.UTC) // last day of month
		for d.Weekday() != time.Sunday {
			d = d.AddDate(0, 0, -1)
		}
		return cohort.DateOf(d)
	}
	d := time.Date(year, month, 1, 12, 0, 0, 0, time.UTC)
	for d.Weekday() != time.Sunday {
		d = d.AddDate(0, 0, 1)
	}
	return cohort.DateOf(d.AddDate(0, 0, 7*(n-1)))
}

func TestDaylightSavingDates(t *testing.T) {
	tests := []struct {
		zone string
		// Rules from memory: US clocks change on the second Sunday of March and
		// the first Sunday of November; EU clocks on the last Sundays of March
		// and October. Checked here against the Go tz database, which is the
		// authority the code relies on.
		rule []cohort.Date
		want []string // the dates given in the brief, from memory
	}{
		{"America/New_York", []cohort.Date{nthSunday(2026, time.March, 2), nthSunday(2026, time.November, 1)}, []string{"2026-03-08", "2026-11-01"}},
		{"Europe/Berlin", []cohort.Date{nthSunday(2026, time.March, -1), nthSunday(2026, time.October, -1)}, []string{"2026-03-29", "2026-10-25"}},
	}
	for _, tt := range tests {
		t.Run(tt.zone, func(t *testing.T) {
			got := dstChanges(t, mustLoad(t, tt.zone), 2026)
			if len(got) != 2 {
				t.Fatalf("tz database gives %d changes in 2026: %v", len(got), got)
			}
			for i := range got {
				if got[i] != tt.rule[i] || got[i].String() != tt.want[i] {
					t.Errorf("change %d: tz database %s, rule %s, brief %s", i, got[i], tt.rule[i], tt.want[i])
				}
			}
		})
	}
}

// TestAddWorkingDaysAcrossDaylightSaving: a deadline across a clock change
// still falls on local midnight, and the wait is one hour shorter or longer
// than the wall clock suggests, by exactly the change in offset.
func TestAddWorkingDaysAcrossDaylightSaving(t *testing.T) {
	for _, zone := range []string{"America/New_York", "Europe/Berlin"} {
		loc := mustLoad(t, zone)
		cal := NewCalendar(loc)
		for _, change := range dstChanges(t, loc, 2026) {
			if weekday(change) != time.Sunday {
				t.Fatalf("%s: change on %s, a %s; the cases below assume a Sunday", zone, change, weekday(change))
			}
			friday, monday, tuesday := change.AddDays(-2), change.AddDays(1), change.AddDays(2)
			from := time.Date(friday.Year, friday.Month, friday.Day, 15, 0, 0, 0, loc)
			cases := []struct {
				name string
				from time.Time
				n    int
				want cohort.Date
			}{
				{"Friday afternoon, n=1", from, 1, monday},
				{"Friday afternoon, n=2", from, 2, tuesday},
				{"on the change day, n=0", time.Date(change.Year, change.Month, change.Day, 12, 0, 0, 0, loc), 0, monday},
				{"on the change day, n=1", time.Date(change.Year, change.Month, change.Day, 12, 0, 0, 0, loc), 1, monday},
			}
			for _, c := range cases {
				got := cal.AddWorkingDays(c.from, c.n)
				want := endOfDay(c.want, loc)
				if !got.Equal(want) {
					t.Errorf("%s %s %s: due %s, want %s", zone, change, c.name, got.In(loc), want)
				}
				if l := got.In(loc); l.Hour() != 0 || l.Minute() != 0 || l.Second() != 0 {
					t.Errorf("%s %s %s: due %s is not local midnight", zone, change, c.name, l)
				}
			}
			// Elapsed time Friday 15:00 -> Tuesday 00:00 local: 81 wall-clock
			// hours (computed: 9 h + 3 x 24 h), minus the offset gained (spring) or
			// plus the offset lost (autumn), the offsets read from the tz database.
			due := cal.AddWorkingDays(from, 1)
			_, offBefore := from.Zone()
			_, offAfter := due.In(loc).Zone()
			wall := 81 * time.Hour
			want := wall - time.Duration(offAfter-offBefore)*time.Second
			if got := due.Sub(from); got != want || got == wall {
				t.Errorf("%s %s: waited %s, want %s (offset change %ds)", zone, change, got, want, offAfter-offBefore)
			}
		}
	}
}

// refAddWorkingDays is an independent reference: it walks days with
// time.Time.AddDate at local noon and looks holidays up by their text.
func refAddWorkingDays(from time.Time, n int, loc *time.Location, holidays map[string]bool, weekend map[time.Weekday]bool) time.Time {
	l := from.In(loc)
	d := time.Date(l.Year(), l.Month(), l.Day(), 12, 0, 0, 0, loc)
	work := func(d time.Time) bool { return !weekend[d.Weekday()] && !holidays[d.Format("2006-01-02")] }
	if n <= 0 {
		for !work(d) {
			d = d.AddDate(0, 0, 1)
		}
	}
	for k := 0; k < n; {
		d = d.AddDate(0, 0, 1)
		if work(d) {
			k++
		}
	}
	return time.Date(d.Year(), d.Month(), d.Day()+1, 0, 0, 0, 0, loc)
}

// TestCalendarAgainstReference compares AddWorkingDays and WorkingDaysBetween
// with the brute-force reference over every 7th hour of 2026, in two zones,
// with two kinds of weekend, and checks the counting identities.
func TestCalendarAgainstReference(t *testing.T) {
	holidayText := []string{"2026-01-01", "2026-04-03", "2026-04-06", "2026-05-01", "2026-05-02", "2026-12-24", "2026-12-25", "2026-12-31"}
	holSet := map[string]bool{}
	var hols []cohort.Date
	for _, h := range holidayText {
		holSet[h] = true
		hols = append(hols, day(t, h))
	}
	weekends := []map[time.Weekday]bool{
		{time.Saturday: true, time.Sunday: true},
		{time.Friday: true, time.Saturday: true},
	}
	for _, zone := range []string{"America/New_York", "Europe/Berlin"} {
		loc := mustLoad(t, zone)
		for wi, we := range weekends {
			cal := Calendar{Location: loc, Holidays: hols}
			for d := range we {
				cal.Weekend[d] = true
			}
			start := time.Date(2026, 1, 1, 0, 0, 0, 0, time.UTC)
			for h := 0; h < 365*24; h += 7 {
				from := start.Add(time.Duration(h) * time.Hour)
				n := h % 12
				got := cal.AddWorkingDays(from, n)
				if want := refAddWorkingDays(from, n, loc, holSet, we); !got.Equal(want) {
					t.Fatalf("%s weekend %d: AddWorkingDays(%s, %d) = %s, reference %s", zone, wi, from.In(loc), n, got.In(loc), want)
				}
				a, b := cal.DateOf(from), cal.DueDay(got)
				if n > 0 {
					if c := cal.WorkingDaysBetween(a, b); c != n {
						t.Fatalf("%s: WorkingDaysBetween(%s, %s) = %d, want n = %d", zone, a, b, c, n)
					}
				}
				if cal.WorkingDaysBetween(a, b) != -cal.WorkingDaysBetween(b, a) {
					t.Fatalf("%s: WorkingDaysBetween not antisymmetric for %s, %s", zone, a, b)
				}
				c := a.AddDays(h % 40)
				if cal.WorkingDaysBetween(a, b)+cal.WorkingDaysBetween(b, c) != cal.WorkingDaysBetween(a, c) {
					t.Fatalf("%s: WorkingDaysBetween not additive over %s, %s, %s", zone, a, b, c)
				}
			}
		}
	}
}

func TestWorkingDaysBetween(t *testing.T) {
	mustWeekday(t, "2026-04-02", time.Thursday)
	cal := NewCalendar(time.UTC, day(t, "2026-04-03"))
	tests := []struct {
		from, to string
		want     int
	}{
		{"2026-04-02", "2026-04-02", 0},
		{"2026-04-02", "2026-04-03", 0},  // holiday Friday
		{"2026-04-02", "2026-04-06", 1},  // Monday
		{"2026-04-04", "2026-04-05", 0},  // Saturday -> Sunday
		{"2026-04-06", "2026-04-13", 5},  // a full week
		{"2026-04-13", "2026-04-06", -5}, // backwards
		{"2026-03-30", "2026-04-13", 9},  // two weeks less one holiday
	}
	for _, tt := range tests {
		if got := cal.WorkingDaysBetween(day(t, tt.from), day(t, tt.to)); got != tt.want {
			t.Errorf("WorkingDaysBetween(%s, %s) = %d, want %d", tt.from, tt.to, got, tt.want)
		}
	}
}

func TestIsWorkingDay(t *testing.T) {
	cal := NewCalendar(time.UTC, day(t, "2026-04-03"))
	var friSat [7]bool
	friSat[time.Friday], friSat[time.Saturday] = true, true
	other := Calendar{Weekend: friSat}
	tests := []struct {
		cal  Calendar
		d    cohort.Date
		want bool
	}{
		{cal, mustWeekday(t, "2026-04-01", time.Wednesday), true},
		{cal, mustWeekday(t, "2026-04-03", time.Friday), false}, // holiday
		{cal, mustWeekday(t, "2026-04-04", time.Saturday), false},
		{cal, mustWeekday(t, "2026-04-05", time.Sunday), false},
		{other, mustWeekday(t, "2026-04-05", time.Sunday), true},
		{other, mustWeekday(t, "2026-04-10", time.Friday), false},
	}
	for _, tt := range tests {
		if got := tt.cal.IsWorkingDay(tt.d); got != tt.want {
			t.Errorf("IsWorkingDay(%s %s) = %v, want %v", tt.d, weekday(tt.d), got, tt.want)
		}
	}
}

func TestCalendarValidate(t *testing.T) {
	var all [7]bool
	for i := range all {
		all[i] = true
	}
	tests := []struct {
		name  string
		cal   Calendar
		field string // "" when valid
	}{
		{"usual", NewCalendar(time.UTC, day(t, "2026-12-25")), ""},
		{"no weekend at all is fine", Calendar{}, ""},
		{"every day off", Calendar{Weekend: all}, "weekend"},
		{"impossible holiday", NewCalendar(nil, day(t, "2026-01-01"), cohort.Date{Year: 2026, Month: 2, Day: 30}), "holidays[1]"},
		{"zero holiday", NewCalendar(nil, cohort.Date{}), "holidays[0]"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			err := tt.cal.Validate()
			if tt.field == "" {
				if err != nil {
					t.Errorf("Validate() = %v", err)
				}
				return
			}
			if err == nil || !strings.Contains(err.Error(), tt.field+":") {
				t.Errorf("Validate() = %v, want a problem with %s", err, tt.field)
			}
		})
	}
	if got := (Calendar{Weekend: all}).AddWorkingDays(time.Date(2026, 4, 1, 9, 0, 0, 0, time.UTC), 1); !got.IsZero() {
		t.Errorf("a calendar without working days gave a deadline %s", got)
	}
}
