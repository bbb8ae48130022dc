package cohort

import (
	"fmt"
	"strconv"
	"strings"
)

// Words are the labels of an enumeration stored as text, keyed by stored
// value: the one place each value's wording is written, beside its type,
// whose Label, Valid and Parse methods use it. An unknown value is not valid
// and is shown quoted, so a bad stored value is visible instead of blank.
type Words[T ~string] map[T]string

// Label is v's wording; an unknown value is shown quoted.
func (w Words[T]) Label(v T) string {
	if l, ok := w[v]; ok {
		return l
	}
	return strconv.Quote(string(v))
}

// Valid reports whether v is one of the defined values.
func (w Words[T]) Valid(v T) bool {
	_, ok := w[v]
	return ok
}

// Parse reads a stored or submitted value, spaces around it ignored. Only the
// stored value is accepted, not its label, so reworded labels never break
// stored data. The error is unknown followed by the value quoted, e.g.
// "followup: unknown contact channel \"fax\"".
func (w Words[T]) Parse(s, unknown string) (T, error) {
	v := T(strings.TrimSpace(s))
	if !w.Valid(v) {
		return "", fmt.Errorf("%s %q", unknown, s)
	}
	return v, nil
}

// Plural counts a thing in words: "1 case", "3 cases", "2 summaries",
// "0 weeks". The one rule for counted words on every page, CSV, PDF and
// message.
func Plural(n int, one string) string {
	return strconv.Itoa(n) + " " + Noun(int64(n), one)
}

// Noun is the word for a count of things, agreeing with it: "participant"
// for 1, "participants" otherwise (for a figure whose number stands apart).
// The plural is English's regular one: a consonant before a final "y" makes
// "ies" ("summary", "summaries"; "day", "days"), a final s, x, z, ch or sh
// takes "es", every other word "s".
func Noun(n int64, one string) string {
	if n == 1 || one == "" {
		return one
	}
	switch {
	case strings.HasSuffix(one, "y") && len(one) > 1 && !strings.ContainsRune("aeiou", rune(one[len(one)-2])):
		return one[:len(one)-1] + "ies"
	case strings.HasSuffix(one, "s"), strings.HasSuffix(one, "x"), strings.HasSuffix(one, "z"),
		strings.HasSuffix(one, "ch"), strings.HasSuffix(one, "sh"):
		return one + "es"
	}
	return one + "s"
}
