package web

import (
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"math"
	"strconv"
	"strings"

	"cohortdesk/cohort"
)

// The small wording and encoding helpers every area's handlers share.

// dayLabel shows a calendar day with its weekday, the way staff plan work
// (cohort.Date.DayLabel: "Thu 3 Dec 2026").
func dayLabel(d cohort.Date) string { return d.DayLabel() }

// csvSafe defuses cells that spreadsheet programs would run as formulas.
func csvSafe(v string) string {
	if v != "" && (v[0] == '=' || v[0] == '+' || v[0] == '-' || v[0] == '@' || v[0] == '\t' || v[0] == '\r') {
		return "'" + v
	}
	return v
}

// sha256Hex is the lower-case hex SHA-256 of b, as digests are shown and stored.
func sha256Hex(b []byte) string {
	sum := sha256.Sum256(b)
	return hex.EncodeToString(sum[:])
}

// humanBytes shows a size in bytes with binary prefixes: "512 B", "1.5 MiB".
func humanBytes(n int64) string {
	const unit = 1024
	if n < unit {
		return fmt.Sprintf("%d B", n)
	}
	div, exp := int64(unit), 0
	for m := n / unit; m >= unit; m /= unit {
		div *= unit
		exp++
	}
	return fmt.Sprintf("%.1f %ciB", float64(n)/float64(div), "KMGTPE"[exp])
}

// seconds shows a duration in seconds to a tenth: "30.0 s".
func seconds(s float64) string { return strconv.FormatFloat(s, 'f', 1, 64) + " s" }

// pct shows a proportion as a percentage to a tenth; a dash when undefined.
func pct(v float64) string {
	if math.IsNaN(v) {
		return "—"
	}
	return strconv.FormatFloat(100*v, 'f', 1, 64) + "%"
}

// num writes a number for a CSV file: fractions with six decimals, nothing
// for an undefined value.
func num(v float64) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return ""
	}
	return strconv.FormatFloat(v, 'f', 6, 64)
}

// orDash shows an empty value as a dash.
func orDash(s string) string {
	if strings.TrimSpace(s) == "" {
		return "—"
	}
	return s
}
