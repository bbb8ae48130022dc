package wear

import (
	"errors"
	"math"
	"strconv"

	"cohortdesk/cohort"
)

// parseInstant reads an RFC 3339 date-time with a UTC offset into Unix
// milliseconds. It accepts exactly the grammar of the time package's strict
// RFC 3339 fast path (four-digit year, 'T', two-digit fields, optional '.'
// fraction of any length, then 'Z' or ±hh:mm), so time.Parse is a reference
// for it; fraction digits past the millisecond are dropped (floor). It is hand
// written because time.Parse with a fixed-offset zone allocates, and the CSV
// reader calls it once or twice per row.
//
// On failure it says why, so a row can be refused with the right reason: a
// bare date (what FHIR calls a partial dateTime) is imprecise, a date-time
// without offset has no offset, anything else is unparsable.
func parseInstant(b []byte) (int64, Reason) { return parseInstantCached(b, nil) }

// dayCache remembers the last calendar day converted, since consecutive rows
// of a file nearly always fall on the same day.
type dayCache struct {
	key  int // year<<9 | month<<5 | day, plus one so the zero value is empty
	days int64
}

func parseInstantCached(b []byte, c *dayCache) (int64, Reason) {
	if len(b) < 19 {
		if isDateOnly(b) {
			return 0, ReasonImpreciseTime
		}
		return 0, ReasonBadTime
	}
	year, ok1 := num4(b[0:4])
	month, ok2 := num2(b[5:7])
	day, ok3 := num2(b[8:10])
	hour, ok4 := num2(b[11:13])
	minute, ok5 := num2(b[14:16])
	sec, ok6 := num2(b[17:19])
	if !(ok1 && ok2 && ok3 && ok4 && ok5 && ok6) ||
		b[4] != '-' || b[7] != '-' || b[10] != 'T' || b[13] != ':' || b[16] != ':' ||
		month < 1 || month > 12 || day < 1 || day > daysIn(month, year) ||
		hour > 23 || minute > 59 || sec > 59 {
		return 0, ReasonBadTime
	}
	rest := b[19:]
	var ms int64
	if len(rest) >= 2 && rest[0] == '.' && isDigit(rest[1]) {
		n := 1
		for ; n < len(rest) && isDigit(rest[n]); n++ {
			if n <= 3 {
				ms = ms*10 + int64(rest[n]-'0')
			}
		}
		for k := n - 1; k < 3; k++ {
			ms *= 10
		}
		rest = rest[n:]
	}
	var offset int
	switch {
	case len(rest) == 0:
		return 0, ReasonNoOffset
	case len(rest) == 1 && rest[0] == 'Z':
	case len(rest) == 6 && (rest[0] == '+' || rest[0] == '-') && rest[3] == ':':
		oh, okh := num2(rest[1:3])
		om, okm := num2(rest[4:6])
		if !okh || !okm || oh > 23 || om > 59 {
			return 0, ReasonBadTime
		}
		offset = (oh*60 + om) * 60
		if rest[0] == '-' {
			offset = -offset
		}
	default:
		return 0, ReasonBadTime
	}
	var days int64
	if key := (year<<9 | month<<5 | day) + 1; c != nil && c.key == key {
		days = c.days
	} else {
		days = daysFromCivil(year, month, day)
		if c != nil {
			c.key, c.days = key, days
		}
	}
	s := days*86400 + int64(hour*3600+minute*60+sec-offset)
	return s*1000 + ms, 0
}

// isDateOnly reports whether b is YYYY, YYYY-MM or YYYY-MM-DD with valid
// fields: a FHIR partial dateTime, which names a day but no instant.
func isDateOnly(b []byte) bool {
	switch len(b) {
	case 4, 7, 10:
	default:
		return false
	}
	year, ok := num4(b[0:4])
	if !ok {
		return false
	}
	if len(b) == 4 {
		return true
	}
	month, ok := num2(b[5:7])
	if !ok || b[4] != '-' || month < 1 || month > 12 {
		return false
	}
	if len(b) == 7 {
		return true
	}
	day, ok := num2(b[8:10])
	return ok && b[7] == '-' && day >= 1 && day <= daysIn(month, year)
}

func isDigit(c byte) bool { return '0' <= c && c <= '9' }

func num2(b []byte) (int, bool) {
	d0, d1 := b[0]-'0', b[1]-'0'
	if d0 > 9 || d1 > 9 {
		return 0, false
	}
	return int(d0)*10 + int(d1), true
}

func num4(b []byte) (int, bool) {
	hi, ok1 := num2(b[0:2])
	lo, ok2 := num2(b[2:4])
	return hi*100 + lo, ok1 && ok2
}

func daysIn(month, year int) int {
	switch month {
	case 2:
		if year%4 == 0 && (year%100 != 0 || year%400 == 0) {
			return 29
		}
		return 28
	case 4, 6, 9, 11:
		return 30
	}
	return 31
}

// daysFromCivil counts days from 1970-01-01 to the given proleptic Gregorian
// date. It shifts the year to start in March so the leap day falls last, then
// counts whole 400-year eras (146097 days each); the days-from-civil method
// in the public domain, checked in tests against the time package.
func daysFromCivil(year, month, day int) int64 {
	y := int64(year)
	if month <= 2 {
		y--
	}
	era := y / 400
	if y < 0 && y%400 != 0 {
		era--
	}
	yoe := y - era*400                     // [0, 399]
	mp := int64((month + 9) % 12)          // March = 0
	doy := (153*mp+2)/5 + int64(day) - 1   // [0, 365]
	doe := yoe*365 + yoe/4 - yoe/100 + doy // [0, 146096]
	return era*146097 + doe - 719468       // 719468 days from 0000-03-01 to 1970-01-01
}

// decimal is a plain decimal number as written: sign, integer digits, and
// whether the fraction rounds up (first fraction digit 5 or more) or is
// non-zero at all. Values beyond int32 only need to be known as too large.
type decimal struct {
	neg       bool
	intPart   int64 // saturates just above math.MaxInt32
	roundUp   bool  // fraction >= 0.5: round half away from zero
	fraction  bool  // fraction is not all zeros
	hasDigits bool
}

// parseDecimal reads [+-]digits[.digits]. No exponent, no thousands
// separators, no spaces: a CSV value written any other way is refused rather
// than guessed at.
func parseDecimal(b []byte) (decimal, bool) {
	var d decimal
	i := 0
	if i < len(b) && (b[i] == '-' || b[i] == '+') {
		d.neg = b[i] == '-'
		i++
	}
	start := i
	for ; i < len(b) && isDigit(b[i]); i++ {
		if d.intPart <= math.MaxInt32 {
			d.intPart = d.intPart*10 + int64(b[i]-'0')
		}
	}
	if i == start {
		return d, false
	}
	d.hasDigits = true
	if i < len(b) && b[i] == '.' {
		i++
		fs := i
		for ; i < len(b) && isDigit(b[i]); i++ {
			if b[i] != '0' {
				d.fraction = true
			}
		}
		if i == fs {
			return d, false
		}
		d.roundUp = b[fs] >= '5'
	}
	return d, i == len(b)
}

// valueOf turns a decimal into the stored integer for kind. Steps are counts
// and must be whole; heart rate and RR intervals are rounded half away from
// zero to whole beats per minute and whole milliseconds, because Samples holds
// integers in those units and a tenth of a beat per minute or of a millisecond
// is below what the screen uses.
func valueOf(d decimal, kind cohort.Kind) (int32, Reason) {
	if d.neg && (d.intPart != 0 || d.fraction) {
		return 0, ReasonOutOfRange
	}
	v := d.intPart
	if kind == cohort.Steps {
		if d.fraction {
			return 0, ReasonNotInteger
		}
	} else if d.roundUp {
		v++
	}
	if v > math.MaxInt32 {
		return 0, ReasonOutOfRange
	}
	return int32(v), 0
}

// parseValue reads a CSV value for kind.
func parseValue(b []byte, kind cohort.Kind) (int32, Reason) {
	d, ok := parseDecimal(b)
	if !ok {
		return 0, ReasonBadNumber
	}
	return valueOf(d, kind)
}

// parseJSONValue reads a JSON number (which may carry an exponent) for kind,
// with the same rules as parseValue.
func parseJSONValue(s string, kind cohort.Kind) (int32, Reason) {
	hasExp := false
	for i := 0; i < len(s); i++ {
		if s[i] == 'e' || s[i] == 'E' {
			hasExp = true
			break
		}
	}
	if !hasExp {
		return parseValue([]byte(s), kind)
	}
	f, err := strconv.ParseFloat(s, 64)
	switch {
	case err != nil && !errors.Is(err, strconv.ErrRange):
		return 0, ReasonBadNumber
	case math.IsInf(f, 0) || f < 0:
		return 0, ReasonOutOfRange
	}
	if kind == cohort.Steps {
		if f != math.Trunc(f) {
			return 0, ReasonNotInteger
		}
	} else {
		f = math.Round(f)
	}
	if f > math.MaxInt32 {
		return 0, ReasonOutOfRange
	}
	return int32(f), 0
}

// kindOf matches the kind column without allocating for the three canonical
// names, and falls back to cohort.ParseKind for its aliases and case rules.
func kindOf(b []byte) (cohort.Kind, bool) {
	switch string(b) {
	case "heart_rate":
		return cohort.HeartRate, true
	case "steps":
		return cohort.Steps, true
	case "rr_interval":
		return cohort.RRInterval, true
	}
	k, err := cohort.ParseKind(string(b))
	return k, err == nil
}

// trimSpace drops ASCII spaces and tabs around a field. Only those two:
// they are what hand-edited files gain; anything else is data.
func trimSpace(b []byte) []byte {
	for len(b) > 0 && (b[0] == ' ' || b[0] == '\t') {
		b = b[1:]
	}
	for len(b) > 0 && (b[len(b)-1] == ' ' || b[len(b)-1] == '\t') {
		b = b[:len(b)-1]
	}
	return b
}
