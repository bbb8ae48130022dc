package wear

import (
	"bufio"
	"bytes"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"unicode/utf8"
)

const (
	readBufSize = 64 << 10
	// maxRecordBytes bounds one record, quoted line breaks included, so a stray
	// quote cannot make the reader swallow a whole file into memory.
	maxRecordBytes = 1 << 20
)

// quoteError is a record-level quoting fault: the record is consumed and
// refused, the reader carries on with the next line, as encoding/csv does.
type quoteError struct {
	line, col int
	msg       string
}

// Error says where the quoting broke.
func (e *quoteError) Error() string {
	return fmt.Sprintf("line %d column %d: %s", e.line, e.col, e.msg)
}

// fatalError stops reading: the reader cannot find the next record boundary
// with confidence, or the file is not text of the declared encoding.
type fatalError struct {
	line, col int
	err       error
}

// Error gives the cause; FileError adds the place.
func (e *fatalError) Error() string { return e.err.Error() }

// recordReader splits a byte stream into CSV records with the rules of
// encoding/csv's Reader in its default settings (comma separator, no comment
// character, strict quotes, \r\n read as \n, blank lines skipped), which the
// tests use as the reference. It differs in what it returns: fields are
// byte slices into its own buffers, valid until the next call, so the common
// unquoted line costs no copy at all.
type recordReader struct {
	br        *bufio.Reader
	checkUTF8 bool
	lines     int      // physical lines read so far
	start     int      // line where the current record starts
	fields    [][]byte // current record
	raw       []byte   // current record as read, line endings as \n, final one dropped
	buf       []byte   // unquoted text of a quoted record's fields
	ends      []int    // end offsets of fields in buf
	long      []byte   // a line longer than the bufio buffer
	rawBuf    []byte   // raw text of a quoted record
	bomDone   bool
}

func newRecordReader(r io.Reader) *recordReader {
	return &recordReader{br: bufio.NewReaderSize(r, readBufSize), checkUTF8: true}
}

// readLine returns the next physical line without its terminator (\n, or
// \r\n, or a final \r at end of input) and whether a \n ended it. eof is true
// when nothing at all was left.
func (rr *recordReader) readLine() (line []byte, nl, eof bool, err error) {
	line, err = rr.br.ReadSlice('\n')
	if err == bufio.ErrBufferFull {
		rr.long = append(rr.long[:0], line...)
		for err == bufio.ErrBufferFull {
			if len(rr.long) > maxRecordBytes {
				return nil, false, false, &fatalError{rr.lines + 1, 0,
					fmt.Errorf("%w: a line exceeds %d bytes", ErrRecordTooLong, maxRecordBytes)}
			}
			line, err = rr.br.ReadSlice('\n')
			rr.long = append(rr.long, line...)
		}
		line = rr.long
	}
	switch {
	case err == io.EOF:
		if len(line) == 0 {
			return nil, false, true, nil
		}
	case err != nil:
		return nil, false, false, err
	}
	rr.lines++
	n := len(line)
	if n > 0 && line[n-1] == '\n' {
		nl = true
		n--
	}
	if n > 0 && line[n-1] == '\r' {
		n--
	}
	line = line[:n]
	if !rr.bomDone {
		rr.bomDone = true
		line = bytes.TrimPrefix(line, []byte("\xef\xbb\xbf"))
	}
	if rr.checkUTF8 && !isASCII(line) && !utf8.Valid(line) {
		col := 1
		for col <= len(line) {
			r, size := utf8.DecodeRune(line[col-1:])
			if r == utf8.RuneError && size <= 1 {
				break
			}
			col += size
		}
		return nil, false, false, &fatalError{rr.lines, col,
			fmt.Errorf("%w: byte %#02x (save the file as UTF-8)", ErrNotUTF8, line[col-1])}
	}
	return line, nl, false, nil
}

// next reads one record. It returns io.EOF at the end, a *quoteError for a
// record whose quoting is broken (the record is still consumed), a
// *fatalError when reading cannot go on, or a read error.
func (rr *recordReader) next() error {
	for {
		line, nl, eof, err := rr.readLine()
		if err != nil {
			return err
		}
		if eof {
			return io.EOF
		}
		if len(line) == 0 {
			continue
		}
		rr.start = rr.lines
		if bytes.IndexByte(line, '"') < 0 {
			rr.splitPlain(line)
			return nil
		}
		return rr.parseQuoted(line, nl)
	}
}

// splitPlain is the fast path: no quote anywhere on the line, so fields are
// just the runs between commas and need no copying.
func (rr *recordReader) splitPlain(line []byte) {
	rr.raw = line
	f := rr.fields[:0]
	for {
		i := bytes.IndexByte(line, ',')
		if i < 0 {
			f = append(f, line)
			break
		}
		f = append(f, line[:i])
		line = line[i+1:]
	}
	rr.fields = f
}

// parseQuoted handles a record with a quote somewhere: fields may be quoted,
// hold commas, doubled quotes, and line breaks. The line passed in and each
// further line are copied into rawBuf for the quarantine before parsing.
func (rr *recordReader) parseQuoted(line []byte, nl bool) error {
	rr.rawBuf = append(rr.rawBuf[:0], line...)
	rr.buf = rr.buf[:0]
	rr.ends = rr.ends[:0]
	col := 1 // 1-based byte column of line[0] within the current physical line
	fail := func(c int, msg string) error {
		rr.raw = rr.rawBuf
		rr.fields = rr.fields[:0]
		return &quoteError{rr.lines, c, msg}
	}
fields:
	for {
		if len(line) == 0 || line[0] != '"' {
			i := bytes.IndexByte(line, ',')
			f := line
			if i >= 0 {
				f = line[:i]
			}
			if j := bytes.IndexByte(f, '"'); j >= 0 {
				return fail(col+j, `bare " in unquoted field`)
			}
			rr.buf = append(rr.buf, f...)
			rr.ends = append(rr.ends, len(rr.buf))
			if i < 0 {
				break fields
			}
			line = line[i+1:]
			col += i + 1
			continue
		}
		line = line[1:]
		col++
		for {
			i := bytes.IndexByte(line, '"')
			if i >= 0 {
				rr.buf = append(rr.buf, line[:i]...)
				line = line[i+1:]
				col += i + 1
				switch {
				case len(line) > 0 && line[0] == '"':
					rr.buf = append(rr.buf, '"')
					line = line[1:]
					col++
				case len(line) > 0 && line[0] == ',':
					rr.ends = append(rr.ends, len(rr.buf))
					line = line[1:]
					col++
					continue fields
				case len(line) == 0:
					rr.ends = append(rr.ends, len(rr.buf))
					break fields
				default:
					return fail(col-1, `extraneous " in quoted field`)
				}
				continue
			}
			rr.buf = append(rr.buf, line...)
			col += len(line)
			if !nl {
				return fail(col, `quoted field not closed before end of file`)
			}
			rr.buf = append(rr.buf, '\n')
			next, nextNL, eof, err := rr.readLine()
			if err != nil {
				return err
			}
			if eof {
				return fail(col, `quoted field not closed before end of file`)
			}
			rr.rawBuf = append(rr.rawBuf, '\n')
			rr.rawBuf = append(rr.rawBuf, next...)
			if len(rr.rawBuf) > maxRecordBytes {
				return &fatalError{rr.start, 0,
					fmt.Errorf("%w: a quoted record starting here exceeds %d bytes (is a closing quote missing?)",
						ErrRecordTooLong, maxRecordBytes)}
			}
			line, nl, col = next, nextNL, 1
		}
	}
	rr.raw = rr.rawBuf
	f := rr.fields[:0]
	prev := 0
	for _, e := range rr.ends {
		f = append(f, rr.buf[prev:e])
		prev = e
	}
	rr.fields = f
	return nil
}

// fileErr turns a recordReader error into the FileError a caller sees.
func fileErr(name string, err error) error {
	var fe *fatalError
	if errors.As(err, &fe) {
		return &FileError{File: name, Line: fe.line, Column: fe.col, Offset: -1, Err: fe.err}
	}
	return &FileError{File: name, Offset: -1, Err: fmt.Errorf("read: %w", err)}
}

// isASCII checks eight bytes at a time; almost every line of a readings file
// is plain ASCII, and this is cheaper than a full UTF-8 check.
func isASCII(b []byte) bool {
	var acc uint64
	for len(b) >= 8 {
		acc |= binary.LittleEndian.Uint64(b)
		b = b[8:]
	}
	for _, c := range b {
		acc |= uint64(c)
	}
	return acc&0x8080808080808080 == 0
}
