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
