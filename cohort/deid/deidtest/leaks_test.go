package deidtest

import (
	"slices"
	"strings"
	"testing"
	"unicode/utf8"
)

// Canaries are invented for these tests; the telephone number uses the 555
// exchange of fictional numbers.
var canaries = []string{"Quillon Varg", "555-010-4477", "1931-04-07", "qv@example.invalid", "CANARY-7731"}

func TestLeaks(t *testing.T) {
	tests := []struct {
		name string
		text string
		want []string
	}{
		{"clean", "referral_code,age\nXQ39-JGN6-HFQ,90 or older\n", nil},
		{"name, other case and spacing", "Patient: QUILLON   varg", []string{"Quillon Varg"}},
		{"name across a line break", "Quillon\nVarg", []string{"Quillon Varg"}},
		{"phone with brackets", "call (555) 010-4477 today", []string{"555-010-4477"}},
		{"phone with dots", "tel 555.010.4477", []string{"555-010-4477"}},
		{"phone with country code", "+1 555 010 4477", []string{"555-010-4477"}},
		{"phone digits only", "x5550104477x", []string{"555-010-4477"}},
		{"date ISO", "born 1931-04-07", []string{"1931-04-07"}},
		{"date US", "dob 04/07/1931", []string{"1931-04-07"}},
		{"date US unpadded", "dob 4/7/1931", []string{"1931-04-07"}},
		{"date day first dotted", "7.4.1931", []string{"1931-04-07"}},
		{"date words", "April 7, 1931", []string{"1931-04-07"}},
		{"date words day first", "7 APR 1931", []string{"1931-04-07"}},
		{"date digits", "id19310407", []string{"1931-04-07"}},
		{"email", "QV@Example.Invalid", []string{"qv@example.invalid"}},
		{"several, in canary order", "canary-7731 and Quillon Varg", []string{"Quillon Varg", "CANARY-7731"}},
		// Numbers far apart are not joined into one run.
		{"separate numbers", "555 rows, 010 kept; 4477 bytes", nil},
		{"other date", "1931-04-08", nil},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got := Leaks(tt.text, canaries)
			if !slices.Equal(got, tt.want) {
				t.Errorf("Leaks(%q) = %q, want %q", tt.text, got, tt.want)
			}
		})
	}
}

func TestLeaksEdges(t *testing.T) {
	if got := Leaks("anything at all", []string{"", "  "}); len(got) != 0 {
		t.Errorf("blank canaries matched: %q", got)
	}
	if got := Leaks("Quillon Varg Quillon Varg", []string{"Quillon Varg", "Quillon Varg"}); len(got) != 1 {
		t.Errorf("duplicate canary reported %d times", len(got))
	}
	// A short digit canary matches only as written, not as digits.
	if got := Leaks("1 2 3 4", []string{"12-34"}); len(got) != 0 {
		t.Errorf("short digit canary matched loosely: %q", got)
	}
}

func FuzzLeaks(f *testing.F) {
	f.Add("prefix ", "Quillon Varg", " suffix")
	f.Add("", "555-010-4477", "")
	f.Add("x", "1931-04-07", "y")
	f.Fuzz(func(t *testing.T, pre, canary, post string) {
		if !utf8.ValidString(pre) || !utf8.ValidString(canary) || !utf8.ValidString(post) {
			return // broken UTF-8 can fuse across the seams into other characters
		}
		got := Leaks(pre+canary+post, []string{canary})
		if strings.TrimSpace(canary) != "" && len(got) != 1 {
			t.Fatalf("canary %q planted verbatim not found: %q", canary, got)
		}
	})
}

// go test -bench Leaks ./cohort/deid
func BenchmarkLeaks(b *testing.B) {
	text := strings.Repeat("XQ39-JGN6-HFQ,60-69,F,week 12,screen-positive,4.5 h\n", 2000)
	for b.Loop() {
		_ = Leaks(text, canaries)
	}
}
