package cohort

import (
	"testing"
	"time"
)

func mustLoc(t *testing.T, name string) *time.Location {
	t.Helper()
	loc, err := time.LoadLocation(name)
	if err != nil {
		t.Fatal(err)
	}
	return loc
}

func TestStudyWeekAcrossDaylightSaving(t *testing.T) {
	ny := mustLoc(t, "America/New_York")
	enrolled := Date{2026, time.March, 2}
	for _, c := range []struct {
		at   time.Time
		want int
	}{
		{time.Date(2026, 3, 2, 0, 0, 0, 0, ny), 0},
		{time.Date(2026, 3, 8, 23, 59, 59, 0, ny), 0}, // the clocks went forward on 8 March 2026 (US rule: second Sunday of March)
		{time.Date(2026, 3, 9, 0, 0, 0, 0, ny), 1},
		{time.Date(2026, 3, 1, 23, 0, 0, 0, ny), -1},
		{time.Date(2026, 3, 9, 3, 30, 0, 0, time.UTC), 0}, // 23:30 on 8 March in New York
	} {
		if got := StudyWeek(enrolled, ny, c.at); got != c.want {
			t.Errorf("StudyWeek(%s) = %d, want %d", c.at, got, c.want)
		}
	}
	start, end := WeekBounds(enrolled, ny, 0)
	if h := end.Sub(start).Hours(); h != 167 {
		t.Errorf("week 0 spans %v hours, want 167 (a lost hour, hand-worked)", h)
	}
	start, end = WeekBounds(Date{2026, time.October, 26}, ny, 0)
	if h := end.Sub(start).Hours(); h != 169 {
		t.Errorf("week spanning the November change lasts %v hours, want 169", h)
	}
}

func TestDateArithmetic(t *testing.T) {
	d := Date{2024, time.February, 28}
	if got := d.AddDays(1); got != (Date{2024, time.February, 29}) {
		t.Errorf("leap day: %v", got)
	}
	if got := (Date{2025, time.January, 1}).DaysSince(d); got != 308 {
		t.Errorf("DaysSince = %d, want 308 (hand-worked: 2 days of Feb 2024 + 306)", got)
	}
	// Mondays from a calendar: 2026-03-02 was a Monday, so the week of
	// Wednesday 2026-03-04 and of Sunday 2026-03-08 starts on it; the year
	// 2026 began on a Thursday, so 2026-01-01 is in the week of 2025-12-29.
	for _, c := range []struct{ d, want Date }{
		{Date{2026, time.March, 2}, Date{2026, time.March, 2}},
		{Date{2026, time.March, 4}, Date{2026, time.March, 2}},
		{Date{2026, time.March, 8}, Date{2026, time.March, 2}},
		{Date{2026, time.January, 1}, Date{2025, time.December, 29}},
	} {
		if got := c.d.Monday(); got != c.want {
			t.Errorf("Monday of %v = %v, want %v", c.d, got, c.want)
		}
	}
	p, err := ParseDate("2026-12-01")
	if err != nil || p.String() != "2026-12-01" {
		t.Errorf("ParseDate: %v %v", p, err)
	}
	if _, err := ParseDate("01/12/2026"); err == nil {
		t.Error("ParseDate accepted a non-ISO date")
	}
}

func TestValidationError(t *testing.T) {
	var ve ValidationError
	if ve.Err() != nil {
		t.Fatal("empty validation error is an error")
	}
	ve.Add("b", "second")
	ve.Add("a", "first")
	ve.Add("a", "ignored")
	if got := ve.Err().Error(); got != "invalid input: a: first; b: second" {
		t.Fatalf("got %q", got)
	}
}

func TestRolesAndPHI(t *testing.T) {
	for _, r := range Roles {
		if !r.Valid() {
			t.Errorf("%s invalid", r)
		}
	}
	if Monitor.SeesDatesAndFreeText() {
		t.Error("monitors must not see participants' calendar dates or staff free text")
	}
	for _, r := range []Role{Coordinator, Investigator, Admin} {
		if !r.SeesDatesAndFreeText() {
			t.Errorf("%s does not see dates and free text", r)
		}
	}
	if Monitor.SeesPHI() {
		t.Error("monitors must not see PHI")
	}
	if !Coordinator.SeesPHI() || !Investigator.SeesPHI() {
		t.Error("coordinators and investigators work with PHI")
	}
	if _, err := ParseRole("root"); err == nil {
		t.Error("unknown role accepted")
	}
}

// Words: a defined value reads as its label; an unknown one is not valid and
// shows quoted; Parse takes the stored value (spaces trimmed), not the label.
func TestWords(t *testing.T) {
	type colour string
	w := Words[colour]{"dark_red": "dark red"}
	if w.Label("dark_red") != "dark red" || w.Label("blue") != `"blue"` || !w.Valid("dark_red") || w.Valid("blue") {
		t.Errorf("labels: %q, %q", w.Label("dark_red"), w.Label("blue"))
	}
	if v, err := w.Parse(" dark_red ", "unknown colour"); err != nil || v != "dark_red" {
		t.Errorf("Parse stored value: %q, %v", v, err)
	}
	if _, err := w.Parse("dark red", "unknown colour"); err == nil || err.Error() != `unknown colour "dark red"` {
		t.Errorf("Parse label: %v, want unknown colour \"dark red\"", err)
	}
}
