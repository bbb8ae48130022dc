package deid

import (
	"fmt"
	"maps"
	"slices"
	"strings"
)

// restrictedZIP3 are the three-digit ZIP prefixes whose combined area held
// 20,000 people or fewer in the 2000 Census, listed in HHS's 2012 "Guidance
// Regarding Methods for De-identification of Protected Health Information in
// Accordance with the HIPAA Privacy Rule". All 17: some copies circulate with
// 15 and miss 790 and 890. The guidance asks for current Census data; if HHS
// publishes a newer list, replace this one.
var restrictedZIP3 = map[string]bool{
	"036": true, "059": true, "063": true, "102": true, "203": true, "556": true,
	"692": true, "790": true, "821": true, "823": true, "830": true, "831": true,
	"878": true, "879": true, "884": true, "890": true, "893": true,
}

// RestrictedZIP3 lists the restricted prefixes in ascending order (a new
// slice each call).
func RestrictedZIP3() []string {
	return slices.Sorted(maps.Keys(restrictedZIP3))
}

// ZIP3 returns the part of a US ZIP code Safe Harbor lets an export keep: the
// first three digits, or "000" when the prefix is restricted. It accepts
// "12345", "12345-6789" and "123456789" with surrounding spaces.
//
// A malformed ZIP gives "000" together with an error wrapping ErrInvalid, so
// a caller that reports the error still has a safe value to print, and one
// that forgets to check cannot leak the raw input.
func ZIP3(zip string) (string, error) {
	z := strings.TrimSpace(zip)
	if len(z) == 10 && z[5] == '-' {
		z = z[:5] + z[6:]
	}
	if (len(z) != 5 && len(z) != 9) || !allDigits(z) {
		return "000", fmt.Errorf("deid: zip %q: want 5 or 9 digits (12345 or 12345-6789): %w", zip, ErrInvalid)
	}
	p := z[:3]
	if restrictedZIP3[p] {
		return "000", nil
	}
	return p, nil
}

func allDigits(s string) bool {
	for i := 0; i < len(s); i++ {
		if s[i] < '0' || s[i] > '9' {
			return false
		}
	}
	return s != ""
}
