package demo

import (
	"bufio"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
	"time"

	"cohortdesk/cohort"
)

// CSVHeader is the header line of the readings CSV format: one reading per
// row; time is RFC 3339 with the UTC offset of the participant's zone and
// millisecond precision where needed; kind is heart_rate, steps or
// rr_interval; value is bpm, a step count or milliseconds; end_time (steps
// only) closes the counting interval.
const CSVHeader = "study_id,time,kind,value,end_time"

// CSVWriter streams readings in the readings CSV format, so the demo can be
// loaded through the real import path and users get example files. It buffers;
// call Flush at the end. The header is written before the first row (or by
// Flush when there are no rows).
type CSVWriter struct {
	w       *bufio.Writer
	buf     []byte
	started bool
	err     error
	zone    zoneCache
}

// NewCSVWriter returns a writer onto w.
func NewCSVWriter(w io.Writer) *CSVWriter {
	return &CSVWriter{w: bufio.NewWriterSize(w, 64<<10), buf: make([]byte, 0, 128)}
}

func (c *CSVWriter) start() {
	if !c.started {
		c.started = true
		_, c.err = c.w.WriteString(CSVHeader + "\n")
	}
}

// WriteWeek writes every reading of a participant-week, merged into time
// order (heart rate before steps before beat intervals at equal times).
func (c *CSVWriter) WriteWeek(p Participant, w cohort.Week) error {
	c.start()
	if c.err != nil {
		return c.err
	}
	loc := p.Loc
	if loc == nil {
		loc = time.UTC
	}
	var i, j, k int
	for c.err == nil {
		kind := cohort.Kind(0)
		t := int64(math.MaxInt64)
		if i < w.HR.Len() && w.HR.T[i] < t {
			kind, t = cohort.HeartRate, w.HR.T[i]
		}
		if j < w.Steps.Len() && w.Steps.T[j] < t {
			kind, t = cohort.Steps, w.Steps.T[j]
		}
		if k < w.RR.Len() && w.RR.T[k] < t {
			kind, t = cohort.RRInterval, w.RR.T[k]
		}
		b := append(c.buf[:0], p.StudyID...)
		b = append(b, ',')
		switch kind {
		case cohort.HeartRate:
			b = c.row(b, loc, t, "heart_rate", w.HR.V[i])
			i++
		case cohort.Steps:
			b = c.row(b, loc, t, "steps", w.Steps.V[j])
			b = c.zone.appendTime(b, loc, w.Steps.End[j])
			j++
		case cohort.RRInterval:
			b = c.row(b, loc, t, "rr_interval", w.RR.V[k])
			k++
		default:
			return nil
		}
		b = append(b, '\n')
		c.buf = b
		_, c.err = c.w.Write(b)
	}
	return c.err
}

// row appends time, kind and value and the comma before end_time.
func (c *CSVWriter) row(b []byte, loc *time.Location, t int64, kind string, v int32) []byte {
	b = c.zone.appendTime(b, loc, t)
	b = append(b, ',')
	b = append(b, kind...)
	b = append(b, ',')
	b = strconv.AppendInt(b, int64(v), 10)
	return append(b, ',')
}

// WriteBad writes a bad row as given, quoting fields per RFC 4180 when needed.
func (c *CSVWriter) WriteBad(r BadRow) error {
	c.start()
	if c.err != nil {
		return c.err
	}
	b := c.buf[:0]
	for i, f := range []string{r.StudyID, r.Time, r.Kind, r.Value, r.EndTime} {
		if i > 0 {
			b = append(b, ',')
		}
		if strings.ContainsAny(f, ",\"\r\n") {
			b = append(b, '"')
			b = append(b, strings.ReplaceAll(f, `"`, `""`)...)
			b = append(b, '"')
		} else {
			b = append(b, f...)
		}
	}
	b = append(b, '\n')
	c.buf = b
	_, c.err = c.w.Write(b)
	return c.err
}

// Flush writes out what is buffered (and the header if nothing else was
// written).
func (c *CSVWriter) Flush() error {
	c.start()
	if c.err != nil {
		return c.err
	}
	c.err = c.w.Flush()
	return c.err
}

// zoneCache remembers the UTC offset of the zone period last looked up, so
// formatting a week of readings asks the time package only at offset changes.
type zoneCache struct {
	loc    *time.Location
	lo, hi int64 // Unix seconds during which off holds
	off    int64 // seconds east of UTC
}

func (z *zoneCache) offset(loc *time.Location, sec int64) int64 {
	if loc != z.loc || sec < z.lo || sec >= z.hi {
		t := time.Unix(sec, 0).In(loc)
		_, off := t.Zone()
		start, end := t.ZoneBounds()
		z.loc, z.off, z.lo, z.hi = loc, int64(off), math.MinInt64, math.MaxInt64
		if !start.IsZero() {
			z.lo = start.Unix()
		}
		if !end.IsZero() {
			z.hi = end.Unix()
		}
	}
	return z.off
}

// appendTime formats Unix milliseconds as the time package's layout
// "2006-01-02T15:04:05.999Z07:00" would in loc (RFC 3339, trailing zeros of
// the fraction dropped), without building a time.Time per row.
func (z *zoneCache) appendTime(b []byte, loc *time.Location, ms int64) []byte {
	sec := floorDiv(ms, 1000)
	frac := ms - sec*1000
	off := z.offset(loc, sec)
	local := sec + off
	days := floorDiv(local, 86400)
	sod := local - days*86400
	y, m, d := civil(days)
	b = append4(b, y)
	b = append(b, '-')
	b = append2(b, int64(m))
	b = append(b, '-')
	b = append2(b, int64(d))
	b = append(b, 'T')
	b = append2(b, sod/3600)
	b = append(b, ':')
	b = append2(b, sod/60%60)
	b = append(b, ':')
	b = append2(b, sod%60)
	if frac != 0 {
		b = append(b, '.', byte('0'+frac/100), byte('0'+frac/10%10), byte('0'+frac%10))
		for b[len(b)-1] == '0' {
			b = b[:len(b)-1]
		}
	}
	if off == 0 {
		return append(b, 'Z')
	}
	sign := byte('+')
	if off < 0 {
		sign, off = '-', -off
	}
	b = append(b, sign)
	b = append2(b, off/3600)
	b = append(b, ':')
	return append2(b, off/60%60)
}

func floorDiv(a, b int64) int64 {
	q := a / b
	if a%b != 0 && (a < 0) != (b < 0) {
		q--
	}
	return q
}

// civil converts days since 1970-01-01 to a proleptic Gregorian date (the
// days-from-civil inverse published by H. Hinnant, "chrono-Compatible Low-Level
// Date Algorithms"; from memory, checked in the tests against the time package).
func civil(z int64) (y int64, m, d int) {
	z += 719468
	era := floorDiv(z, 146097)
	doe := z - era*146097
	yoe := (doe - doe/1460 + doe/36524 - doe/146096) / 365
	y = yoe + era*400
	doy := doe - (365*yoe + yoe/4 - yoe/100)
	mp := (5*doy + 2) / 153
	d = int(doy - (153*mp+2)/5 + 1)
	if mp < 10 {
		m = int(mp + 3)
	} else {
		m = int(mp - 9)
	}
	if m <= 2 {
		y++
	}
	return y, m, d
}

func append2(b []byte, v int64) []byte { return append(b, byte('0'+v/10), byte('0'+v%10)) }

func append4(b []byte, v int64) []byte {
	return append(b, byte('0'+v/1000%10), byte('0'+v/100%10), byte('0'+v/10%10), byte('0'+v%10))
}

// BadRow is a deliberately faulty readings row for the import demo, with the
// fault it carries. Fields are raw text, so malformed values can be shown.
type BadRow struct {
	StudyID, Time, Kind, Value, EndTime string
	Problem                             string // what is wrong, in words for the demo
}

// BadRows returns rows an importer must refuse (or, for the duplicate, skip),
// each belonging to a real participant so only the planted fault is wrong.
// The duplicate repeats the first reading of that participant's week 0, so it
// is a duplicate only once the good data has been imported.
func (s *Study) BadRows() []BadRow {
	var p Participant
	var w cohort.Week
	for _, q := range s.Participants {
		if q.Canary || s.WeekCount(q) == 0 {
			continue
		}
		if wk, _ := s.Week(q, 0); wk.HR.Len() > 0 {
			p, w = q, wk
			break
		}
	}
	if p.StudyID == "" {
		return nil
	}
	var z zoneCache
	at := func(ms int64) string { return string(z.appendTime(nil, p.Loc, ms)) }
	base := w.Start + 10*hour
	atMin := func(n int64) string { return at(base + n*minute) }
	noOffset := time.UnixMilli(base).In(p.Loc).Format("2006-01-02T15:04:05")
	wrongCheck := p.StudyID[:len(p.StudyID)-1] + string(checkAlphabet[(strings.IndexByte(checkAlphabet, p.StudyID[len(p.StudyID)-1])+1)%len(checkAlphabet)])
	badDate := fmt.Sprintf("%04d-02-30T08:15:00-06:00", p.Enrolled.Year)
	return []BadRow{
		{p.StudyID, atMin(1), "heart_rate", "300", "", "implausible heart rate (300 bpm)"},
		{p.StudyID, atMin(2), "heart_rate", "12", "", "implausible heart rate (12 bpm)"},
		{p.StudyID, at(s.Today.UnixMilli() + 72*hour), "heart_rate", "71", "", "time in the future"},
		{p.StudyID, atMin(3), "blood_pressure", "120", "", "unknown kind"},
		{p.StudyID, badDate, "heart_rate", "64", "", "invalid date (30 February)"},
		{p.StudyID, noOffset, "heart_rate", "66", "", "time without a UTC offset"},
		{p.StudyID, atMin(4), "heart_rate", "eighty", "", "value is not a number"},
		{p.StudyID, atMin(5), "steps", "-40", atMin(20), "negative step count"},
		{p.StudyID, atMin(30), "steps", "120", atMin(15), "interval ends before it starts"},
		{p.StudyID, atMin(45), "steps", "85", "", "steps without end_time"},
		{p.StudyID, atMin(6), "rr_interval", "5200", "", "implausible beat interval (5200 ms)"},
		{wrongCheck, atMin(7), "heart_rate", "70", "", "study ID check letter does not match"},
		{"ZZZ-0001-" + string(CheckLetter("ZZZ-0001")), atMin(8), "heart_rate", "70", "", "study ID not enrolled"},
		{"", atMin(9), "heart_rate", "70", "", "missing study ID"},
		{p.StudyID, at(w.HR.T[0]), "heart_rate", strconv.Itoa(int(w.HR.V[0])), "", "duplicate of a reading in the demo data"},
	}
}
