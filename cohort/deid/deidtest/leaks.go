// Package deidtest holds what tests need to prove that an export or a page
// leaks no identifier: Leaks finds planted canary values in text, in the forms
// a careless export would write them. It is test support only: no production
// code imports it.
package deidtest

import (
	"strconv"
	"strings"
	"time"
	"unicode"
)

// minDigits is the shortest digit string matched in digits-only form. Shorter
// ones (a house number, a day of the month) turn up in any export by chance.
const minDigits = 7

// Leaks returns the canaries that occur in text, in the order given, each
// once. It exists for tests that prove an export leaks nothing: plant
// unmistakable identifiers in demo PHI, render the export, and require
// Leaks to return nothing.
//
// Matching is deliberately generous, since a missed leak is worse than a
// false alarm:
//   - case-insensitive, with runs of white space treated as one space;
//   - a canary with at least 7 digits (a telephone, record or serial number)
//     also matches its digits alone inside any run of digits in the text
//     joined by short separators, so "(555) 010-4477", "555.010.4477" and
//     "+1 555 010 4477" all match the canary "555-010-4477";
//   - a canary that is a date (YYYY-MM-DD or MM/DD/YYYY) also matches its
//     common written forms: "April 7, 1931", "7 Apr 1931", "04/07/1931",
//     "7.4.1931", and the digit runs 19310407, 04071931, 07041931, 471931.
//
// The price is that an innocent number can match a digits-only form; demo
// canaries should use digit strings no export would produce by chance.
func Leaks(text string, canaries []string) []string {
	norm := squash(text)
	runs := digitRuns(text)
	var out []string
	seen := map[string]bool{}
	for _, c := range canaries {
		if seen[c] || strings.TrimSpace(c) == "" {
			continue
		}
		if leaked(norm, runs, c) {
			seen[c] = true
			out = append(out, c)
		}
	}
	return out
}

func leaked(norm string, runs []string, canary string) bool {
	if strings.Contains(norm, squash(canary)) {
		return true
	}
	var words, digitForms []string
	if d, ok := parseCanaryDate(canary); ok {
		words, digitForms = dateForms(d)
	}
	if ds := onlyDigits(canary); len(ds) >= minDigits {
		digitForms = append(digitForms, ds)
	}
	for _, w := range words {
		if strings.Contains(norm, w) {
			return true
		}
	}
	for _, ds := range digitForms {
		for _, r := range runs {
			if strings.Contains(r, ds) {
				return true
			}
		}
	}
	return false
}

// squash lower-cases and folds every run of white space into one space.
func squash(s string) string {
	return strings.Join(strings.Fields(strings.ToLower(s)), " ")
}

func onlyDigits(s string) string {
	var b strings.Builder
	for _, r := range s {
		if r >= '0' && r <= '9' {
			b.WriteRune(r)
		}
	}
	return b.String()
}

// digitRuns splits text into runs of digits, joining digit groups separated
// by at most two separator characters of the kind found inside telephone
// numbers and dates: space, hyphen, dot, slash, parentheses, plus.
func digitRuns(text string) []string {
	var runs []string
	var cur strings.Builder
	gap := 0
	flush := func() {
		if cur.Len() > 0 {
			runs = append(runs, cur.String())
			cur.Reset()
		}
		gap = 0
	}
	for _, r := range text {
		switch {
		case r >= '0' && r <= '9':
			cur.WriteRune(r)
			gap = 0
		case strings.ContainsRune(" -./()+", r) || r == '\u00a0' || (unicode.IsSpace(r) && r != '\n' && r != '\r'):
			if cur.Len() == 0 {
				continue
			}
			gap++
			if gap > 2 {
				flush()
			}
		default:
			flush()
		}
	}
	flush()
	return runs
}

func parseCanaryDate(s string) (time.Time, bool) {
	for _, layout := range []string{"2006-01-02", "01/02/2006", "1/2/2006"} {
		if t, err := time.Parse(layout, strings.TrimSpace(s)); err == nil {
			return t, true
		}
	}
	return time.Time{}, false
}

// dateForms lists the written forms (lower case, single spaces) and the
// digits-only forms of a date.
func dateForms(t time.Time) (words, digits []string) {
	for _, layout := range []string{
		"2006-01-02", "2006/01/02", "01/02/2006", "1/2/2006", "02/01/2006", "2/1/2006",
		"02.01.2006", "2.1.2006", "01-02-2006", "02-01-2006",
		"January 2, 2006", "January 2 2006", "2 January 2006", "2 January, 2006",
		"Jan 2, 2006", "Jan 2 2006", "2 Jan 2006", "02-Jan-2006", "2-Jan-2006", "02 Jan 2006",
		"Jan. 2, 2006",
	} {
		words = append(words, squash(t.Format(layout)))
	}
	y, m, d := t.Date()
	ys, ms, ds := strconv.Itoa(y), strconv.Itoa(int(m)), strconv.Itoa(d)
	pad := func(s string) string {
		if len(s) == 1 {
			return "0" + s
		}
		return s
	}
	digits = []string{
		ys + pad(ms) + pad(ds), // 19310407
		pad(ms) + pad(ds) + ys, // 04071931
		pad(ds) + pad(ms) + ys, // 07041931
		ms + ds + ys,           // 471931
		ds + ms + ys,           // 741931
	}
	return words, digits
}
