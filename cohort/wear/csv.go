package wear

import (
	"io"

	"cohortdesk/cohort"
)

// Row is one accepted reading, as read from a file and before it is assigned
// to a participant-week.
type Row struct {
	StudyID string      // as written in the file; equal IDs share one string
	Kind    cohort.Kind // never zero in a row a reader returns
	T       int64       // Unix ms: the instant (heart rate, RR) or interval start (steps)
	End     int64       // Unix ms, end of the counting interval; steps only, else 0
	V       int32       // bpm, step count or ms, per Kind
	Line    int         // 1-based line where the row (CSV) or the FHIR entry starts
}

// Source is what every wear reader offers, so the import code can treat CSV
// and FHIR files alike. Use it as a scanner:
//
//	for src.Next() {
//		if rej := src.Rejection(); rej != nil { ... continue }
//		row := src.Row()
//	}
//	if err := src.Err(); err != nil { ... }
type Source interface {
	// Next moves to the next accepted row or rejection; false at the end or
	// after a file-level error.
	Next() bool
	// Row is the current row; meaningful only when Rejection is nil.
	Row() Row
	// Rejection is the current refused row, or nil.
	Rejection() *Rejection
	// Err is the *FileError that stopped reading, or nil at a clean end.
	Err() error
}

// ReadBatch moves up to max rows from src into rows and the rejections met on
// the way into rejs, so a loader can hand rows on in blocks. It returns
// io.EOF once src is exhausted (the last rows may come with it), or the
// file-level error that stopped src.
func ReadBatch(src Source, rows []Row, rejs []*Rejection, max int) ([]Row, []*Rejection, error) {
	for n := 0; n < max; {
		if !src.Next() {
			if err := src.Err(); err != nil {
				return rows, rejs, err
			}
			return rows, rejs, io.EOF
		}
		if rej := src.Rejection(); rej != nil {
			rejs = append(rejs, rej)
			continue
		}
		rows = append(rows, src.Row())
		n++
	}
	return rows, rejs, nil
}

// The columns of the readings CSV, in the order the roles are indexed.
const (
	colStudyID = iota
	colTime
	colKind
	colValue
	colEnd
)

var readingColumns = []column{
	colStudyID: {"study_id", true},
	colTime:    {"time", true},
	colKind:    {"kind", true},
	colValue:   {"value", true},
	colEnd:     {"end_time", false},
}

// CSVReader streams readings out of a CSV file in the format described in the
// package documentation. It holds one record at a time, never the file.
type CSVReader struct {
	csvLines
	row  Row
	days dayCache
}

// NewCSVReader reads readings from r; name is used in messages (a file name).
// The header is read on the first call to Next.
func NewCSVReader(r io.Reader, name string) *CSVReader {
	return &CSVReader{csvLines: newCSVLines(r, name, readingColumns)}
}

// Next implements Source.
func (c *CSVReader) Next() bool {
	if !c.step() {
		return false
	}
	if c.rej == nil {
		c.parse()
	}
	return true
}

// Row implements Source.
func (c *CSVReader) Row() Row { return c.row }

// parse checks one record's fields in column order and keeps either a row or
// the first problem found.
func (c *CSVReader) parse() {
	f := c.rr.fields
	if len(f) != c.ncols {
		c.reject(ReasonFieldCount, "", "record has %d fields, header has %d", len(f), c.ncols)
		return
	}
	sid := trimSpace(f[c.idx[colStudyID]])
	if len(sid) == 0 {
		c.reject(ReasonMissingField, "study_id", "study_id is empty")
		return
	}
	tb := trimSpace(f[c.idx[colTime]])
	if len(tb) == 0 {
		c.reject(ReasonMissingField, "time", "time is empty")
		return
	}
	t, why := parseInstantCached(tb, &c.days)
	if why != 0 {
		c.rejectTime(why, "time", tb)
		return
	}
	kb := trimSpace(f[c.idx[colKind]])
	if len(kb) == 0 {
		c.reject(ReasonMissingField, "kind", "kind is empty")
		return
	}
	kind, ok := kindOf(kb)
	if !ok {
		c.reject(ReasonUnknownKind, "kind", "kind %s is not heart_rate, steps or rr_interval", quote(kb))
		return
	}
	vb := trimSpace(f[c.idx[colValue]])
	if len(vb) == 0 {
		c.reject(ReasonMissingValue, "value", "value is empty")
		return
	}
	v, why := parseValue(vb, kind)
	if why != 0 {
		c.rejectValue(why, kind, vb)
		return
	}
	var eb []byte
	if c.idx[colEnd] >= 0 {
		eb = trimSpace(f[c.idx[colEnd]])
	}
	var end int64
	if kind == cohort.Steps {
		if len(eb) == 0 {
			c.reject(ReasonMissingEnd, "end_time", "steps need end_time, the end of the counting interval")
			return
		}
		end, why = parseInstantCached(eb, &c.days)
		if why != 0 {
			c.rejectTime(why, "end_time", eb)
			return
		}
		if end <= t {
			c.reject(ReasonEndBeforeStart, "end_time", "end_time %s is not after time %s", quote(eb), quote(tb))
			return
		}
	} else if len(eb) > 0 {
		c.reject(ReasonUnexpectedEnd, "end_time", "end_time %s given for %s, which is an instant reading; leave it empty", quote(eb), kind)
		return
	}
	c.row = Row{StudyID: c.ids.get(sid), Kind: kind, T: t, End: end, V: v, Line: c.rr.start}
}

func (c *CSVReader) rejectTime(why Reason, field string, b []byte) {
	switch why {
	case ReasonNoOffset:
		c.reject(why, field, "%s %s has no UTC offset (add Z or ±hh:mm, e.g. 2026-03-02T07:15:00-05:00)", field, quote(b))
	case ReasonImpreciseTime:
		c.reject(why, field, "%s %s is a date; a reading needs a clock time and UTC offset", field, quote(b))
	default:
		c.reject(why, field, "%s %s is not an RFC 3339 time (want e.g. 2026-03-02T07:15:00-05:00)", field, quote(b))
	}
}

func (c *CSVReader) rejectValue(why Reason, kind cohort.Kind, b []byte) {
	switch why {
	case ReasonNotInteger:
		c.reject(why, "value", "value %s for %s must be a whole number", quote(b), kind)
	case ReasonOutOfRange:
		c.reject(why, "value", "value %s for %s is negative or above %d", quote(b), kind, int64(1<<31-1))
	default:
		c.reject(why, "value", "value %s is not a decimal number", quote(b))
	}
}

// maxInterned bounds the study-ID table; past it the table starts afresh,
// which costs one allocation per ID again but keeps memory flat on files
// that name very many participants.
const maxInterned = 1 << 16

// interner gives one string per distinct study ID, so a million rows of one
// participant share one string instead of a million copies.
type interner struct {
	last string
	m    map[string]string
}

func (in *interner) get(b []byte) string {
	if string(b) == in.last {
		return in.last
	}
	if s, ok := in.m[string(b)]; ok {
		in.last = s
		return s
	}
	if in.m == nil || len(in.m) >= maxInterned {
		in.m = make(map[string]string)
	}
	s := string(b)
	in.m[s] = s
	in.last = s
	return s
}
