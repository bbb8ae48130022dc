package web

import (
	"crypto/sha256"
	"encoding/hex"
	"strconv"
	"time"

	"cohortdesk/cohort"
)

// The small wording and encoding helpers every area's handlers share.

// dayLabel shows a calendar day with its weekday, the way staff plan work.
func dayLabel(d cohort.Date) string {
	return time.Date(d.Year, d.Month, d.Day, 12, 0, 0, 0, time.UTC).Format("Mon 2 Jan 2006")
}

// plural counts a thing in words: "1 case", "3 cases".
func plural(n int, one string) string {
	if n == 1 {
		return "1 " + one
	}
	return strconv.Itoa(n) + " " + one + "s"
}

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
