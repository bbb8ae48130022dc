package ecg

import (
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"
)

// parseDecimal reads a number in plain decimal notation (digits, a sign, a
// point, an exponent), the one number rule of the CSV reader's fields and
// the EDF header's numeric fields. Surrounding spaces are ignored; "NaN",
// "Inf", hexadecimal floats, digit separators and numbers beyond a float64
// are refused like any other junk.
func parseDecimal(s string) (float64, error) {
	s = strings.TrimSpace(s)
	if s == "" {
		return 0, errors.New("empty, want a number")
	}
	for i := 0; i < len(s); i++ {
		c := s[i]
		if !(c >= '0' && c <= '9' || c == '.' || c == '-' || c == '+' || c == 'e' || c == 'E') {
			return 0, fmt.Errorf("%q is not a number", s)
		}
	}
	v, err := strconv.ParseFloat(s, 64)
	if err != nil || math.IsInf(v, 0) {
		return 0, fmt.Errorf("%q is not a finite number", s)
	}
	return v, nil
}
