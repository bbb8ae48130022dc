package enrolment

import (
	"errors"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"
)

func fields(tb testing.TB, err error) map[string]string {
	tb.Helper()
	if err == nil {
		return nil
	}
	var ve *cohort.ValidationError
	if !errors.As(err, &ve) {
		tb.Fatalf("error %v (%T): want *cohort.ValidationError", err, err)
	}
	return ve.Fields
}

func day(y, m, d int) cohort.Date { return cohort.Date{Year: y, Month: time.Month(m), Day: d} }

func TestEnrolmentCheck(t *testing.T) {
	today := day(2026, 6, 1)
	good := Enrolment{StudyID: "RS-1", SiteID: 1, Sex: cohort.Female, TimeZone: "America/Chicago", EnrolledOn: day(2026, 3, 2),
		ZIP: "60614", Email: "a@example.org"}
	if err := good.Check(today); err != nil {
		t.Fatalf("good record refused: %v", err)
	}
	future, late, ancient := day(2027, 1, 1), day(2026, 3, 2), day(1890, 1, 1)
	bad := Enrolment{StudyID: "bad id", TimeZone: "Mars/Base", EnrolledOn: future, ZIP: "12", Email: "nobody"}
	got := fields(t, bad.Check(today))
	for _, f := range []string{"study_id", "site_id", "sex", "time_zone", "enrolled_on", "zip", "email"} {
		if got[f] == "" {
			t.Errorf("no message for %s (%v)", f, got)
		}
	}
	if got["enrolled_on"] != "the enrolment date is in the future" {
		t.Errorf("enrolled_on: %q", got["enrolled_on"])
	}
	// The birth date is checked against a usable enrolment date only.
	bad.BirthDate = &late
	if got := fields(t, bad.Check(today)); got["birth_date"] != "" {
		t.Errorf("birth date checked against a future enrolment: %q", got["birth_date"])
	}
	for _, c := range []struct {
		birth cohort.Date
		want  string
	}{
		{late, "the birth date must be before the enrolment date"},
		{ancient, "the birth date is more than 130 years before enrolment"},
		{day(1950, 6, 15), ""},
	} {
		e := good
		e.BirthDate = &c.birth
		if got := fields(t, e.Check(today))["birth_date"]; got != c.want {
			t.Errorf("birth %s: %q, want %q", c.birth, got, c.want)
		}
	}
	unset := good
	unset.EnrolledOn = cohort.Date{}
	if got := fields(t, unset.Check(today))["enrolled_on"]; got == "" {
		t.Error("an unset enrolment date is accepted")
	}
	for z, ok := range map[string]bool{"60614": true, "60614-1234": true, "606141234": true, "12": false, "6061A": false, "60614-123": false} {
		if zipOK(z) != ok {
			t.Errorf("ZIP %q accepted %v, want %v", z, !ok, ok)
		}
	}
}

func TestAgeAt(t *testing.T) {
	for _, c := range []struct {
		birth, at cohort.Date
		want      int
	}{
		{day(1950, 6, 15), day(2026, 3, 2), 75},  // before the birthday in 2026 (computed by hand)
		{day(1950, 3, 2), day(2026, 3, 2), 76},   // on the birthday
		{day(1960, 2, 29), day(2026, 2, 28), 65}, // leap-day birthday, not yet in a common year
		{day(1960, 2, 29), day(2026, 3, 1), 66},
	} {
		if got := AgeAt(&c.birth, c.at); got == nil || *got != c.want {
			t.Errorf("AgeAt(%s, %s) = %v, want %d", c.birth, c.at, got, c.want)
		}
	}
	if AgeAt(nil, day(2026, 1, 1)) != nil {
		t.Error("an age without a birth date")
	}
}

func TestWithdrawal(t *testing.T) {
	today := day(2026, 6, 1)
	if err := (Withdrawal{On: day(2026, 4, 1), Reason: "moved away"}).Check(today); err != nil {
		t.Fatal(err)
	}
	got := fields(t, Withdrawal{On: day(2026, 6, 2), Reason: " "}.Check(today))
	if got["withdrawn_on"] != "the withdrawal date is in the future" || got["reason"] == "" {
		t.Errorf("future, no reason: %v", got)
	}
	w := Withdrawal{On: day(2026, 1, 1), Reason: "x"}
	if got := fields(t, w.CheckAgainst(day(2026, 3, 2), nil)); got["withdrawn_on"] != "the withdrawal date is before enrolment (2026-03-02)" {
		t.Errorf("before enrolment: %v", got)
	}
	earlier := day(2026, 5, 1)
	if got := fields(t, (Withdrawal{On: today}).CheckAgainst(day(2026, 3, 2), &earlier)); got["withdrawn_on"] != "already withdrawn on 2026-05-01" {
		t.Errorf("twice: %v", got)
	}
}

func TestCheckNote(t *testing.T) {
	for body, ok := range map[string]bool{"called back": true, "  ": false, strings.Repeat("n", 4000): true, strings.Repeat("n", 4001): false} {
		if got := CheckNote(body); (got == nil) != ok {
			t.Errorf("note of %d characters: %v", len(body), got)
		}
	}
}
