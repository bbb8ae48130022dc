package wear

import (
	"encoding/csv"
	"errors"
	"io"
	"reflect"
	"strings"
	"testing"
)

// splitResult is one record as a reader saw it: fields, or a quoting fault,
// and the line it started on.
type splitResult struct {
	fields []string
	bad    bool
	line   int
}

// ourRecords runs the recordReader over in with the checks that encoding/csv
// does not make (UTF-8, byte-order mark) switched off.
func ourRecords(tb testing.TB, in string) []splitResult {
	tb.Helper()
	rr := newRecordReader(strings.NewReader(in))
	rr.checkUTF8, rr.bomDone = false, true
	var out []splitResult
	for {
		err := rr.next()
		var qe *quoteError
		switch {
		case err == io.EOF:
			return out
		case errors.As(err, &qe):
			out = append(out, splitResult{bad: true, line: rr.start})
		case err != nil:
			tb.Fatalf("recordReader: %v", err)
		default:
			fields := make([]string, len(rr.fields))
			for i, f := range rr.fields {
				fields[i] = string(f)
			}
			out = append(out, splitResult{fields: fields, line: rr.start})
		}
	}
}

// refRecords runs encoding/csv, the reference, in its default settings with
// any number of fields per record.
func refRecords(tb testing.TB, in string) []splitResult {
	tb.Helper()
	r := csv.NewReader(strings.NewReader(in))
	r.FieldsPerRecord = -1
	var out []splitResult
	for {
		rec, err := r.Read()
		var pe *csv.ParseError
		switch {
		case err == io.EOF:
			return out
		case errors.As(err, &pe):
			out = append(out, splitResult{bad: true, line: pe.StartLine})
		case err != nil:
			tb.Fatalf("encoding/csv: %v", err)
		default:
			line, _ := r.FieldPos(0)
			out = append(out, splitResult{fields: rec, line: line})
		}
	}
}

// TestRecordReaderMatchesEncodingCSV compares records, quoting faults and
// start lines with encoding/csv (computed: reference library) on the corner
// cases of RFC 4180 quoting.
func TestRecordReaderMatchesEncodingCSV(t *testing.T) {
	inputs := []string{
		"a,b,c\n1,2,3\n",
		"a,b,c\r\n1,2,3\r\n",
		"a,b\n\n\n1,2",
		"a,b\n1,2\r",
		`"a","b ""quoted""",c` + "\n",
		"\"multi\nline\",x\ny,z\n",
		"\"multi\r\nline\",x\n",
		"\"\",,\"\"\n",
		"a,\"b\"c,d\nnext,line\n",
		"a,b\"c\nnext\n",
		"\"unterminated,x\ny,z\n",
		"\"unterminated at eof",
		"a,\n,\n",
		" spaced , \"q\" \n",
		"\"a\"\"\"\n",
		"x\r\r\ny\n",
		"\"a\n\n\nb\",c\n",
	}
	for _, in := range inputs {
		got, want := ourRecords(t, in), refRecords(t, in)
		if !reflect.DeepEqual(got, want) {
			t.Errorf("input %q:\n got %+v\nwant %+v", in, got, want)
		}
	}
}

// FuzzRecordSplit is a differential test: on any input the record splitter
// must find the same records, fields, quoting faults and start lines as
// encoding/csv.
func FuzzRecordSplit(f *testing.F) {
	f.Add("study_id,time\n\"a,b\",\"c\"\"d\"\n")
	f.Add("a\n\"b\nc\",d\r\ne\"f\n")
	f.Add("\"x\"y\n")
	f.Fuzz(func(t *testing.T, in string) {
		got, want := ourRecords(t, in), refRecords(t, in)
		if !reflect.DeepEqual(got, want) {
			t.Fatalf("input %q:\n got %+v\nwant %+v", in, got, want)
		}
	})
}
