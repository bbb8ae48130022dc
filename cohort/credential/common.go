package credential

import (
	"crypto/sha256"
	_ "embed"
	"encoding/binary"
	"strings"
	"unicode"
)

// commonList is the sorted digests of 10,000 common passwords (see
// gencommon for where they come from and how the file is made).
//
//go:embed common_passwords.bin
var commonList []byte

// CommonDigest is the digest a password is listed under: the first four bytes
// of SHA-256 of the lower-cased password. Among 10,000 entries a password not
// on the list matches by chance with odds of about 1 in 430,000.
func CommonDigest(pw string) uint32 {
	sum := sha256.Sum256([]byte(strings.ToLower(pw)))
	return binary.BigEndian.Uint32(sum[:4])
}

func isCommon(pw string) bool {
	d := CommonDigest(pw)
	lo, hi := 0, len(commonList)/4
	for lo < hi {
		m := (lo + hi) / 2
		v := binary.BigEndian.Uint32(commonList[4*m:])
		switch {
		case v == d:
			return true
		case v < d:
			lo = m + 1
		default:
			hi = m
		}
	}
	return false
}

// weakPassword says why pw is too easy to guess, or "". NIST SP 800-63B
// section 5.1.1.2 has new passwords compared against "passwords obtained from
// previous breach corpuses, dictionary words, repetitive or sequential
// characters, context-specific words, such as the name of the service, the
// username" (from memory). Checked, on the lower-cased password:
//   - on the common-password list, or a listed password repeated
//     ("dragondragon"), or with only digits and symbols around it
//     ("password2026!");
//   - a run of one, two or three characters repeated, or a sequence of
//     letters, digits or keyboard keys ("aaaaaaaaaaaa", "123456789012",
//     "qwertyuiopas");
//   - the service's name or one of the context words (the person's name or
//     e-mail address) with only digits and symbols around it.
func weakPassword(pw string, context []string) string {
	lower := strings.ToLower(pw)
	core := strings.TrimFunc(lower, func(r rune) bool { return !unicode.IsLetter(r) })
	if core == "" {
		core = lower
	}
	for _, cand := range []string{lower, core} {
		if isCommon(cand) {
			return "it is one of the most common passwords, or one with only digits or symbols added"
		}
		if unit, ok := repeatedUnit(cand); ok && (len(unit) <= 3 || isCommon(unit)) {
			return "it repeats a few characters or a common word"
		}
	}
	if sequential(lower) {
		return "it is a sequence of letters, digits or keyboard keys"
	}
	words := append([]string{"cohortdesk", "cohort desk", "cohort"}, context...)
	for _, w := range words {
		w = strings.ToLower(strings.TrimSpace(w))
		if len(w) >= 4 && (core == w || strings.ReplaceAll(core, " ", "") == strings.ReplaceAll(w, " ", "")) {
			return "it is your name, your e-mail address or the name of this service"
		}
	}
	return ""
}

// repeatedUnit finds the shortest u with s == u repeated at least twice.
func repeatedUnit(s string) (string, bool) {
	for n := 1; n <= len(s)/2; n++ {
		if len(s)%n == 0 && strings.Repeat(s[:n], len(s)/n) == s {
			return s[:n], true
		}
	}
	return "", false
}

// keyboardRows are the rows of the common keyboard layout, for sequences.
var keyboardRows = []string{"1234567890", "qwertyuiop", "asdfghjkl", "zxcvbnm", "abcdefghijklmnopqrstuvwxyz", "0123456789"}

// sequential reports a password that walks one step at a time along a
// keyboard row or the alphabet or the digits, forwards or back, wrapping
// round: "123456789012", "zyxwvutsrqpo", "qwertyuiopqw".
func sequential(s string) bool {
	if len(s) < 4 {
		return false
	}
	for _, row := range keyboardRows {
		for _, dir := range []int{1, -1} {
			pos := strings.IndexByte(row, s[0])
			if pos < 0 {
				continue
			}
			ok := true
			for i := 1; i < len(s); i++ {
				pos = (pos + dir + len(row)) % len(row)
				if row[pos] != s[i] {
					ok = false
					break
				}
			}
			if ok {
				return true
			}
		}
	}
	return false
}
