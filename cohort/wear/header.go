package wear

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"strings"
)

// column describes one column a CSV format knows.
type column struct {
	name     string
	required bool
}

// readHeader reads the first record and finds each known column in it.
// Unknown columns are refused rather than ignored: a misspelt column would
// otherwise look like a missing one, and an unexpected column (a unit, a
// device, a time zone) may change what the others mean.
func readHeader(rr *recordReader, name string, cols []column) (idx []int, n int, err error) {
	switch err := rr.next(); {
	case err == io.EOF:
		return nil, 0, &FileError{File: name, Line: 1, Offset: -1,
			Err: fmt.Errorf("%w: no header line (want %s)", ErrEmptyFile, columnList(cols))}
	case err != nil:
		var qe *quoteError
		if errors.As(err, &qe) {
			return nil, 0, &FileError{File: name, Line: qe.line, Column: qe.col, Offset: -1,
				Err: fmt.Errorf("%w: %s", ErrBadHeader, qe.msg)}
		}
		return nil, 0, fileErr(name, err)
	}
	idx = make([]int, len(cols))
	for i := range idx {
		idx[i] = -1
	}
	line := rr.start
	for pos, f := range rr.fields {
		h := strings.ToLower(string(trimSpace(f)))
		found := false
		for c, col := range cols {
			if col.name != h {
				continue
			}
			if idx[c] >= 0 {
				return nil, 0, &FileError{File: name, Line: line, Offset: -1,
					Err: fmt.Errorf("%w: %q is column %d and column %d", ErrDuplicateColumn, h, idx[c]+1, pos+1)}
			}
			idx[c] = pos
			found = true
		}
		if !found {
			return nil, 0, &FileError{File: name, Line: line, Offset: -1,
				Err: fmt.Errorf("%w: %s in column %d (known columns: %s)", ErrUnknownColumn, quote(bytes.TrimSpace(f)), pos+1, columnList(cols))}
		}
	}
	var missing []string
	for c, col := range cols {
		if col.required && idx[c] < 0 {
			missing = append(missing, col.name)
		}
	}
	if len(missing) > 0 {
		return nil, 0, &FileError{File: name, Line: line, Offset: -1,
			Err: fmt.Errorf("%w: header lacks %s", ErrMissingColumn, strings.Join(missing, ", "))}
	}
	return idx, len(rr.fields), nil
}

func columnList(cols []column) string {
	names := make([]string, len(cols))
	for i, c := range cols {
		names[i] = c.name
		if !c.required {
			names[i] += " (optional)"
		}
	}
	return strings.Join(names, ", ")
}
