package ecg

import (
	"strings"
	"testing"
)

// parseDecimal is the number rule of both readers: plain decimal notation
// as strconv.ParseFloat reads it (Go's documented syntax), without the
// special values and notations a file of samples should never hold.
func TestParseDecimal(t *testing.T) {
	for _, tc := range []struct {
		in   string
		want float64
	}{{"0", 0}, {" -0.25 ", -0.25}, {"+12", 12}, {"1e3", 1000}, {"2.5E-1", 0.25}, {"-32768", -32768}} {
		if got, err := parseDecimal(tc.in); err != nil || got != tc.want {
			t.Errorf("parseDecimal(%q) = %g, %v; want %g", tc.in, got, err, tc.want)
		}
	}
	for _, tc := range []struct{ in, msg string }{
		{"", "empty"}, {"   ", "empty"}, {"NaN", "not a number"}, {"Inf", "not a number"}, {"0x1p-2", "not a number"},
		{"1_000", "not a number"}, {"1,5", "not a number"}, {"1e999", "not a finite number"}, {"--1", "not a finite number"},
	} {
		if _, err := parseDecimal(tc.in); err == nil || !strings.Contains(err.Error(), tc.msg) {
			t.Errorf("parseDecimal(%q): error %v, want one saying %q", tc.in, err, tc.msg)
		}
	}
}
