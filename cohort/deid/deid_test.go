package deid

import (
	"errors"
	"fmt"
	"slices"
	"strings"
	"testing"

	"cohortdesk/cohort"
	"cohortdesk/cohort/stats"
)

func wantInvalid(tb testing.TB, name string, err error) {
	tb.Helper()
	if !errors.Is(err, ErrInvalid) {
		tb.Errorf("%s: err = %v, want ErrInvalid", name, err)
	}
}

func mustDate(tb testing.TB, s string) cohort.Date {
	tb.Helper()
	d, err := cohort.ParseDate(s)
	if err != nil {
		tb.Fatal(err)
	}
	return d
}

// 45 CFR 164.514(b)(2)(i)(A)-(R) lists 18 identifier classes (verified;
// check-values.md "HIPAA Safe Harbor").
func TestIdentifiersTable(t *testing.T) {
	ids := Identifiers()
	if len(ids) != 18 {
		t.Fatalf("%d identifier classes, want 18", len(ids))
	}
	// Spot checks of the regulation's order (verified).
	wantNames := map[int]string{1: "names", 4: "telephone", 7: "social security", 13: "device", 15: "(ip)", 18: "any other unique"}
	for i, id := range ids {
		if id.Number != i+1 {
			t.Errorf("entry %d has number %d", i, id.Number)
		}
		switch id.Treatment {
		case Removed, Generalised, NotCollected:
		default:
			t.Errorf("%d: treatment %q", id.Number, id.Treatment)
		}
		if id.Name == "" || id.How == "" {
			t.Errorf("%d: empty name or description", id.Number)
		}
		if w, ok := wantNames[id.Number]; ok && !strings.Contains(strings.ToLower(id.Name), w) {
			t.Errorf("%d: name %q, want it to contain %q", id.Number, id.Name, w)
		}
	}
	ids[0].Treatment = NotCollected
	if Identifiers()[0].Treatment != Removed {
		t.Error("Identifiers must return a copy")
	}
}

// HHS, Guidance Regarding Methods for De-identification of Protected Health
// Information in Accordance with the HIPAA Privacy Rule, 2012: the 17
// restricted three-digit ZIP prefixes (verified, secondary, several agreeing
// copies; check-values.md). 790 and 890 are the two a circulating short copy
// misses.
var hhs2012Restricted = []string{"036", "059", "063", "102", "203", "556", "692", "790",
	"821", "823", "830", "831", "878", "879", "884", "890", "893"}

func TestZIP3Restricted(t *testing.T) {
	if got := RestrictedZIP3(); !slices.Equal(got, hhs2012Restricted) {
		t.Errorf("RestrictedZIP3 = %v, want the 17 of the HHS 2012 guidance", got)
	}
	for _, p := range hhs2012Restricted {
		for _, zip := range []string{p + "01", p + "99", p + "01-2345", p + "012345", " " + p + "55 "} {
			got, err := ZIP3(zip)
			if err != nil || got != "000" {
				t.Errorf("ZIP3(%q) = %q, %v; want 000 (45 CFR 164.514(b)(2)(i)(B), HHS 2012 list)", zip, got, err)
			}
		}
	}
}

// Prefixes not on the list keep their three digits (45 CFR
// 164.514(b)(2)(i)(B)), including the neighbours of restricted ones.
func TestZIP3Kept(t *testing.T) {
	for _, tt := range []struct{ zip, want string }{
		{"02139", "021"}, {"03701", "037"}, {"79101", "791"}, {"88901", "889"},
		{"89101-1234", "891"}, {"100011234", "100"}, {"99950", "999"},
	} {
		got, err := ZIP3(tt.zip)
		if err != nil || got != tt.want {
			t.Errorf("ZIP3(%q) = %q, %v; want %q", tt.zip, got, err, tt.want)
		}
	}
}

// Malformed ZIPs give "000" and an error: the safe value even for a caller
// that drops the error.
func TestZIP3Invalid(t *testing.T) {
	for _, zip := range []string{"", "1234", "123456", "12a45", "12345-678", "1234-56789", "１２３４５", "12 345"} {
		got, err := ZIP3(zip)
		wantInvalid(t, fmt.Sprintf("ZIP3(%q)", zip), err)
		if got != "000" {
			t.Errorf("ZIP3(%q) = %q, want 000", zip, got)
		}
	}
}

func FuzzZIP3(f *testing.F) {
	for _, s := range []string{"02139", "03601", "12345-6789", "", "x", "790000000"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, zip string) {
		got, err := ZIP3(zip)
		if len(got) != 3 || !allDigits(got) {
			t.Fatalf("ZIP3(%q) = %q, want three digits", zip, got)
		}
		if err != nil && got != "000" {
			t.Fatalf("ZIP3(%q) = %q with error %v, want 000", zip, got, err)
		}
		if err == nil && got != "000" && !strings.HasPrefix(strings.TrimSpace(zip), got) {
			t.Fatalf("ZIP3(%q) = %q is not the input's prefix", zip, got)
		}
		if slices.Contains(hhs2012Restricted, got) {
			t.Fatalf("ZIP3(%q) returned restricted prefix %q", zip, got)
		}
	})
}

// Ages over 89 fold into "90 or older" (45 CFR 164.514(b)(2)(i)(C);
// verified). The boundary: 89 stays, 90 and 91 fold.
func TestAgeOfBoundary(t *testing.T) {
	ref := mustDate(t, "2025-06-15")
	tests := []struct {
		birth      string
		years      int
		over       bool
		text       string
		birthYear  int
		birthYrOK  bool
		mentioning string
	}{
		{"1936-06-15", 89, false, "89", 1936, true, "89 today"},
		{"1935-06-16", 89, false, "89", 0, false, "89, turns 90 tomorrow: the year 1935 suggests 90"},
		{"1935-06-15", 90, true, "90 or older", 0, false, "90 today"},
		{"1934-01-01", 90, true, "90 or older", 0, false, "91 (Years holds 90, never the exact age)"},
		{"1980-02-29", 45, false, "45", 1980, true, "leap-day birth"},
		{"2025-06-15", 0, false, "0", 2025, true, "born on the reference day"},
	}
	for _, tt := range tests {
		t.Run(tt.mentioning, func(t *testing.T) {
			got, err := AgeOf(mustDate(t, tt.birth), ref)
			if err != nil {
				t.Fatal(err)
			}
			if got.Years != tt.years || got.Over89 != tt.over || got.String() != tt.text ||
				got.BirthYear != tt.birthYear || got.BirthYearOK != tt.birthYrOK {
				t.Errorf("AgeOf(%s) = %+v %q; want years %d, over89 %v, %q, birth year %d/%v",
					tt.birth, got, got.String(), tt.years, tt.over, tt.text, tt.birthYear, tt.birthYrOK)
			}
		})
	}
}

// Whole-year age by hand, including the 29 February rule we document.
func TestAgeAt(t *testing.T) {
	tests := []struct {
		birth, ref string
		want       int
	}{
		{"1960-03-10", "2025-03-09", 64},
		{"1960-03-10", "2025-03-10", 65},
		{"1960-02-29", "2025-02-28", 64},
		{"1960-02-29", "2025-03-01", 65},
		{"1960-02-29", "2024-02-29", 64},
	}
	for _, tt := range tests {
		got, err := AgeAt(mustDate(t, tt.birth), mustDate(t, tt.ref))
		if err != nil || got != tt.want {
			t.Errorf("AgeAt(%s, %s) = %d, %v; want %d", tt.birth, tt.ref, got, err, tt.want)
		}
	}
	_, err := AgeAt(mustDate(t, "2025-01-02"), mustDate(t, "2025-01-01"))
	wantInvalid(t, "birth after reference", err)
	_, err = AgeAt(cohort.Date{Year: 1960, Month: 2, Day: 30}, mustDate(t, "2025-01-01"))
	wantInvalid(t, "30 February", err)
	_, err = AgeOf(mustDate(t, "1960-01-01"), cohort.Date{Year: 2025, Month: 13, Day: 1})
	wantInvalid(t, "month 13", err)
}

func TestAgeBand(t *testing.T) {
	ref := mustDate(t, "2025-06-15")
	def, _ := stats.NewAgeBands(50, 60, 70, 80)
	to90, _ := stats.NewAgeBands(50, 60, 70, 80, 90)
	past90, _ := stats.NewAgeBands(50, 95)
	tests := []struct {
		birth string
		bands stats.AgeBands
		want  string
	}{
		{"1960-01-01", def, "60-69"},
		{"1934-01-01", def, "80+"},
		{"1936-06-15", to90, "80-89"},
		{"1935-06-15", to90, "90 or older"},
	}
	for _, tt := range tests {
		a, err := AgeOf(mustDate(t, tt.birth), ref)
		if err != nil {
			t.Fatal(err)
		}
		got, err := a.Band(tt.bands)
		if err != nil || got != tt.want {
			t.Errorf("band of %s = %q, %v; want %q", tt.birth, got, err, tt.want)
		}
	}
	a, _ := AgeOf(mustDate(t, "1960-01-01"), ref)
	_, err := a.Band(past90)
	wantInvalid(t, "band cut 95", err)
}

// TestOneAgeBandRule: the one set of age bands (AgeCuts), whatever the
// source of the age; ages above 89 fold into the Safe Harbor category.
// Bands ours; the fold is 45 CFR 164.514(b)(2)(i)(C).
func TestOneAgeBandRule(t *testing.T) {
	for age, want := range map[int]string{18: "<50", 49: "<50", 50: "50-54", 62: "60-64", 64: "60-64", 65: "65-69", 74: "70-74", 75: "75-79",
		89: "85-89", 90: Over89Label, 104: Over89Label} {
		if got := AgeBand(age); got != want {
			t.Errorf("AgeBand(%d) = %q, want %q", age, got, want)
		}
	}
	if got := AgeBandLabels(); len(got) != 10 || got[0] != "<50" || got[len(got)-1] != Over89Label {
		t.Errorf("labels %v", got)
	}
	enrolled := cohort.Date{Year: 2025, Month: 3, Day: 1}
	for _, tt := range []struct {
		today cohort.Date
		want  int
	}{{cohort.Date{Year: 2026, Month: 2, Day: 28}, 62}, {cohort.Date{Year: 2026, Month: 3, Day: 1}, 63}, {cohort.Date{Year: 2025, Month: 1, Day: 1}, 62}} {
		if got := AgeSince(62, enrolled, tt.today); got.Years != tt.want {
			t.Errorf("62 at enrolment on %s, on %s: %d, want %d", enrolled, tt.today, got.Years, tt.want)
		}
	}
}
