package deid

import (
	"crypto/hmac"
	"crypto/sha256"
	"fmt"
	"strings"
)

// codeAlphabet is our 32-character alphabet for referral codes: digits and
// upper-case letters without 0, 1, I and O, which readers confuse when a
// code is read out over the telephone or copied from paper.
const codeAlphabet = "23456789ABCDEFGHJKLMNPQRSTUVWXYZ"

const (
	codeBase    = len(codeAlphabet)
	codeDataLen = 10 // 50 bits of the keyed hash
	// CodeLen is the number of characters of a referral code without its
	// hyphens: 10 data characters and 1 check character.
	CodeLen = codeDataLen + 1
	// MinSecretLen is the shortest deployment secret Code accepts, in bytes.
	// The secret is all that stands between a study ID and its code.
	MinSecretLen = 16
)

// codeContext separates referral codes from any other use of the same
// secret: the same key with another context gives unrelated values.
const codeContext = "cohortdesk referral code v1\x00"

// Code returns the participant's pseudonymous referral code: HMAC-SHA-256 of
// the study ID keyed with the deployment secret, its first 50 bits written in
// 10 characters of our alphabet, one check character, formatted with hyphens
// as XXXX-XXXX-XXX for reading aloud. The study ID is hashed exactly as
// given, so callers pass its stored, canonical form.
//
// With 50 bits, two participants share a code with probability about
// n^2 / 2^51 (about 1 in 900,000 for 50,000 participants); the database
// should still hold codes unique and refuse a collision.
//
// Code panics when the secret is shorter than MinSecretLen: that is a
// deployment error to catch at start-up with CheckSecret, not a value to
// continue with.
func Code(secret []byte, studyID string) string {
	if err := CheckSecret(secret); err != nil {
		panic(err)
	}
	mac := hmac.New(sha256.New, secret)
	mac.Write([]byte(codeContext))
	mac.Write([]byte(studyID))
	sum := mac.Sum(nil)

	var v uint64
	for _, b := range sum[:8] {
		v = v<<8 | uint64(b)
	}
	digits := make([]int, codeDataLen)
	for i := range digits {
		digits[i] = int(v >> (64 - 5*(i+1)) & 31)
	}
	raw := make([]byte, 0, CodeLen)
	for _, d := range digits {
		raw = append(raw, codeAlphabet[d])
	}
	raw = append(raw, codeAlphabet[checkDigit(digits, codeBase)])
	return FormatCode(string(raw))
}

// CheckSecret reports whether a deployment secret is long enough for Code.
func CheckSecret(secret []byte) error {
	if len(secret) < MinSecretLen {
		return fmt.Errorf("deid: referral code secret is %d bytes, want at least %d: %w", len(secret), MinSecretLen, ErrInvalid)
	}
	return nil
}

// checkDigit is the Luhn mod N check character (N = 32) of the data digits:
// from the right, every other digit starting with the rightmost is doubled
// and its two base-N digits added. Because doubling-and-adding is a
// permutation of 0..N-1, every single-character substitution changes the sum
// mod N and is caught. Adjacent transpositions are caught except the swap of
// the values 0 and N-1 ("2" and "Z" here), the analogue of 09/90 in the
// decimal scheme (Luhn HP. US Patent 2,950,048, 1960; from memory).
// The base is a parameter so the scheme can be tested on published examples
// in other bases.
func checkDigit(digits []int, base int) int {
	sum, double := 0, true
	for i := len(digits) - 1; i >= 0; i-- {
		sum += weigh(digits[i], double, base)
		double = !double
	}
	return (base - sum%base) % base
}

func weigh(d int, double bool, base int) int {
	if !double {
		return d
	}
	d *= 2
	return d/base + d%base
}

// NormalizeCode accepts a referral code as a person types it (lower case,
// with or without hyphens or spaces) and returns its 11 characters without
// hyphens, or an error wrapping ErrInvalid when it is not a valid code.
func NormalizeCode(code string) (string, error) {
	raw := strings.Map(func(r rune) rune {
		if r == '-' || r == ' ' {
			return -1
		}
		if r >= 'a' && r <= 'z' {
			return r - 'a' + 'A'
		}
		return r
	}, code)
	if len(raw) != CodeLen {
		return "", fmt.Errorf("deid: referral code %q: want %d characters: %w", code, CodeLen, ErrInvalid)
	}
	sum, double := 0, false
	for i := len(raw) - 1; i >= 0; i-- {
		d := strings.IndexByte(codeAlphabet, raw[i])
		if d < 0 {
			return "", fmt.Errorf("deid: referral code %q: character %q at position %d is not in the code alphabet: %w", code, raw[i], i+1, ErrInvalid)
		}
		sum += weigh(d, double, codeBase)
		double = !double
	}
	if sum%codeBase != 0 {
		return "", fmt.Errorf("deid: referral code %q: check character does not match (mistyped?): %w", code, ErrInvalid)
	}
	return raw, nil
}

// ValidCode reports whether code is a well-formed referral code with a
// matching check character. It says nothing about whether the code belongs
// to a participant; that is a database question.
func ValidCode(code string) bool {
	_, err := NormalizeCode(code)
	return err == nil
}

// FormatCode writes an 11-character code as XXXX-XXXX-XXX. Other lengths are
// returned unchanged.
func FormatCode(raw string) string {
	if len(raw) != CodeLen {
		return raw
	}
	return raw[:4] + "-" + raw[4:8] + "-" + raw[8:]
}
