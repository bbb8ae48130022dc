package wear

import (
	"errors"
	"fmt"
	"io"
)

// csvLines walks the records of a CSV file with a header, for the readings
// and the external verdicts readers alike: the header is read on the first
// step; a record with broken quoting is refused and reading goes on; the end
// of the file stops the walk, and anything else that stops it is the file's
// error (a *FileError).
type csvLines struct {
	name    string
	rr      *recordReader
	columns []column
	idx     []int // the header's column of each of columns
	ncols   int
	started bool
	rej     *Rejection
	err     error
	ids     interner
}

func newCSVLines(r io.Reader, name string, columns []column) csvLines {
	return csvLines{name: name, rr: newRecordReader(r), columns: columns}
}

// step moves to the next record: false at the end or after a file error;
// true with rej set for a refused record, or with the record to parse in
// rr.fields.
func (l *csvLines) step() bool {
	if l.err != nil {
		return false
	}
	if !l.started {
		l.started = true
		l.idx, l.ncols, l.err = readHeader(l.rr, l.name, l.columns)
		if l.err != nil {
			return false
		}
	}
	l.rej = nil
	if err := l.rr.next(); err != nil {
		var qe *quoteError
		switch {
		case err == io.EOF:
			return false
		case errors.As(err, &qe):
			l.reject(ReasonBadQuoting, "", "%s at column %d", qe.msg, qe.col)
			return true
		default:
			l.err = fileErr(l.name, err)
			return false
		}
	}
	return true
}

// Rejection is the current refused record, or nil (Source).
func (l *csvLines) Rejection() *Rejection { return l.rej }

// Err is the *FileError that stopped reading, or nil at a clean end (Source).
func (l *csvLines) Err() error { return l.err }

// reject refuses the current record for why, naming the field ("" for the
// whole record).
func (l *csvLines) reject(why Reason, field, format string, args ...any) {
	l.rej = &Rejection{Reason: why, File: l.name, Line: l.rr.start, Entry: -1, Offset: -1, Field: field,
		Msg: fmt.Sprintf(format, args...), Raw: string(l.rr.raw)}
}
