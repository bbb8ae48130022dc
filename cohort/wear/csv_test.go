package wear

import (
	"bytes"
	"errors"
	"io"
	"os"
	"strings"
	"testing"
	"unsafe"

	"cohortdesk/cohort"
)

// readAll drains a Source into rows and rejections and returns its error.
func readAll(tb testing.TB, src Source) ([]Row, []*Rejection, error) {
	tb.Helper()
	var rows []Row
	var rejs []*Rejection
	for src.Next() {
		if rej := src.Rejection(); rej != nil {
			rejs = append(rejs, rej)
			continue
		}
		rows = append(rows, src.Row())
	}
	return rows, rejs, src.Err()
}

func mustOpen(tb testing.TB, name string) []byte {
	tb.Helper()
	b, err := os.ReadFile("testdata/" + name)
	if err != nil {
		tb.Fatal(err)
	}
	return b
}

func TestCSVReaderGoodFile(t *testing.T) {
	rows, rejs, err := readAll(t, NewCSVReader(bytes.NewReader(mustOpen(t, "readings.csv")), "readings.csv"))
	if err != nil {
		t.Fatal(err)
	}
	if len(rejs) != 0 {
		t.Fatalf("rejections in a good file: %v", rejs)
	}
	// Times are checked against time.Parse (the reference); values are the
	// documented rounding of what the file says.
	want := []Row{
		{"S-0001", cohort.HeartRate, mustMillis(t, "2026-03-02T07:15:00-05:00"), 0, 64, 2},
		{"S-0001", cohort.Steps, mustMillis(t, "2026-03-02T07:15:00-05:00"), mustMillis(t, "2026-03-02T07:16:00-05:00"), 112, 3},
		{"S-0001", cohort.RRInterval, mustMillis(t, "2026-03-02T07:15:00.250-05:00"), 0, 938, 4},
		{"S-0001", cohort.HeartRate, mustMillis(t, "2026-03-02T07:20:07.5-05:00"), 0, 72, 5}, // 71.5 rounds to 72
		{"S-0002", cohort.HeartRate, mustMillis(t, "2026-03-02T12:00:00Z"), 0, 58, 6},
		{"S-0002", cohort.Steps, mustMillis(t, "2026-03-02T12:00:00Z"), mustMillis(t, "2026-03-02T12:05:00Z"), 0, 7},
		{"S-0002", cohort.RRInterval, mustMillis(t, "2026-03-02T12:03:30.123+01:00"), 0, 1012, 8},
	}
	if len(rows) != len(want) {
		t.Fatalf("got %d rows, want %d: %+v", len(rows), len(want), rows)
	}
	for i := range want {
		if rows[i] != want[i] {
			t.Errorf("row %d = %+v, want %+v", i, rows[i], want[i])
		}
	}
}

func TestCSVReaderBadFile(t *testing.T) {
	// testdata/readings_bad.csv holds one line per rejection reason a
	// readings CSV can get, then one good line to show reading goes on:
	//
	//	line  2  four fields under a five-column header  field_count
	//	line  3  6"4: a quote inside an unquoted field   bad_quoting
	//	line  4  empty study_id                          missing_field
	//	line  5  space instead of T                      bad_time
	//	line  6  no offset                               no_offset
	//	line  7  a date only                             imprecise_time
	//	line  8  blood_pressure                          unknown_kind
	//	line  9  sixty                                   bad_number
	//	line 10  12.5 steps                              not_integer
	//	line 11  -64 bpm                                 out_of_range
	//	line 12  steps without end_time                  missing_end
	//	line 13  steps ending before they start          end_before_start
	//	line 14  heart rate with an end_time             unexpected_end
	//	line 15  empty value                             missing_value
	//	line 16  good                                    (a row)
	want := map[int]Reason{
		2: ReasonFieldCount, 3: ReasonBadQuoting, 4: ReasonMissingField, 5: ReasonBadTime,
		6: ReasonNoOffset, 7: ReasonImpreciseTime, 8: ReasonUnknownKind, 9: ReasonBadNumber,
		10: ReasonNotInteger, 11: ReasonOutOfRange, 12: ReasonMissingEnd, 13: ReasonEndBeforeStart,
		14: ReasonUnexpectedEnd, 15: ReasonMissingValue,
	}
	data := mustOpen(t, "readings_bad.csv")
	lines := strings.Split(string(data), "\n")
	rows, rejs, err := readAll(t, NewCSVReader(bytes.NewReader(data), "readings_bad.csv"))
	if err != nil {
		t.Fatal(err)
	}
	if len(rows) != 1 || rows[0].Line != 16 || rows[0].V != 66 {
		t.Errorf("rows = %+v, want the one good row of line 16", rows)
	}
	if len(rejs) != len(want) {
		t.Fatalf("got %d rejections, want %d", len(rejs), len(want))
	}
	seen := map[Reason]bool{}
	for _, rej := range rejs {
		if w, ok := want[rej.Line]; !ok || rej.Reason != w {
			t.Errorf("line %d: reason %v (%s), want %v", rej.Line, rej.Reason, rej.Msg, w)
		}
		if rej.Raw != lines[rej.Line-1] {
			t.Errorf("line %d: raw %q, want the line as written %q", rej.Line, rej.Raw, lines[rej.Line-1])
		}
		if rej.File != "readings_bad.csv" || rej.Msg == "" {
			t.Errorf("line %d: file %q msg %q", rej.Line, rej.File, rej.Msg)
		}
		seen[rej.Reason] = true
	}
	if len(seen) != len(want) {
		t.Errorf("%d distinct reasons, want %d (each once)", len(seen), len(want))
	}
}

func TestCSVReaderLayouts(t *testing.T) {
	hr := mustMillis(t, "2026-03-02T07:15:00Z")
	tests := []struct {
		name string
		in   string
		want []Row
	}{
		{"columns reordered, no end_time column",
			"Value,Kind, study_id ,TIME\n64,heart_rate,S-1,2026-03-02T07:15:00Z\n",
			[]Row{{"S-1", cohort.HeartRate, hr, 0, 64, 2}}},
		{"byte-order mark and CRLF",
			"\xef\xbb\xbfstudy_id,time,kind,value,end_time\r\nS-1,2026-03-02T07:15:00Z,heart_rate,64,\r\n",
			[]Row{{"S-1", cohort.HeartRate, hr, 0, 64, 2}}},
		{"quoted fields with comma and line break",
			"study_id,time,kind,value,end_time\n\"S,1\",\"2026-03-02T07:15:00Z\",heart_rate,\"64\",\n\"S\n2\",2026-03-02T07:15:00Z,heart_rate,65,\nS-3,2026-03-02T07:15:00Z,heart_rate,66,\n",
			[]Row{{"S,1", cohort.HeartRate, hr, 0, 64, 2}, {"S\n2", cohort.HeartRate, hr, 0, 65, 3}, {"S-3", cohort.HeartRate, hr, 0, 66, 5}}},
		{"blank lines and no final newline",
			"study_id,time,kind,value\n\nS-1,2026-03-02T07:15:00Z,heart_rate,64\n\n\nS-1,2026-03-02T07:15:00Z,hr,65",
			[]Row{{"S-1", cohort.HeartRate, hr, 0, 64, 3}, {"S-1", cohort.HeartRate, hr, 0, 65, 6}}},
		{"header only", "study_id,time,kind,value,end_time\n", nil},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got, rejs, err := readAll(t, NewCSVReader(strings.NewReader(tt.in), "x.csv"))
			if err != nil || len(rejs) != 0 {
				t.Fatalf("err %v, rejections %v", err, rejs)
			}
			if len(got) != len(tt.want) {
				t.Fatalf("got %+v, want %+v", got, tt.want)
			}
			for i := range got {
				if got[i] != tt.want[i] {
					t.Errorf("row %d = %+v, want %+v", i, got[i], tt.want[i])
				}
			}
		})
	}
}

func TestCSVReaderFileErrors(t *testing.T) {
	tests := []struct {
		name     string
		in       string
		want     error
		line     int
		column   int
		rowsSeen int
	}{
		{"empty", "", ErrEmptyFile, 1, 0, 0},
		{"only blank lines", "\n\r\n", ErrEmptyFile, 1, 0, 0},
		{"missing columns", "study_id,time\n", ErrMissingColumn, 1, 0, 0},
		{"unknown column", "study_id,time,kind,value,device\n", ErrUnknownColumn, 1, 0, 0},
		{"duplicate column", "study_id,time,kind,value,Time\n", ErrDuplicateColumn, 1, 0, 0},
		{"bad header quoting", "study_id,\"time\"x,kind,value\n", ErrBadHeader, 1, 0, 0},
		{"latin-1 byte on line 3", "study_id,time,kind,value\nS-1,2026-03-02T07:15:00Z,hr,60\nS-\xe9,2026-03-02T07:15:00Z,hr,60\n", ErrNotUTF8, 3, 3, 1},
		{"record too long", "study_id,time,kind,value\n\"" + strings.Repeat("x\n", maxRecordBytes/2+10), ErrRecordTooLong, 2, 0, 0},
		{"line too long", "study_id,time,kind,value\n" + strings.Repeat("x", maxRecordBytes+readBufSize+1) + "\n", ErrRecordTooLong, 2, 0, 0},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			rows, _, err := readAll(t, NewCSVReader(strings.NewReader(tt.in), "f.csv"))
			var fe *FileError
			if !errors.As(err, &fe) || !errors.Is(err, tt.want) {
				t.Fatalf("err = %v, want a FileError wrapping %v", err, tt.want)
			}
			if fe.File != "f.csv" || fe.Line != tt.line || (tt.column != 0 && fe.Column != tt.column) {
				t.Errorf("where = %s:%d:%d, want f.csv:%d:%d", fe.File, fe.Line, fe.Column, tt.line, tt.column)
			}
			if len(rows) != tt.rowsSeen {
				t.Errorf("%d rows before the error, want %d", len(rows), tt.rowsSeen)
			}
		})
	}
}

// failingReader returns some data and then an error, as a broken network
// read would.
type failingReader struct {
	data []byte
	err  error
}

func (f *failingReader) Read(p []byte) (int, error) {
	if len(f.data) == 0 {
		return 0, f.err
	}
	n := copy(p, f.data)
	f.data = f.data[n:]
	return n, nil
}

func TestCSVReaderReadError(t *testing.T) {
	boom := errors.New("connection reset")
	r := &failingReader{data: []byte("study_id,time,kind,value\nS-1,2026-03-02T07:15:00Z,hr,60\n"), err: boom}
	rows, _, err := readAll(t, NewCSVReader(r, "up.csv"))
	if !errors.Is(err, boom) || len(rows) != 1 {
		t.Fatalf("rows %d, err %v; want 1 row then the read error", len(rows), err)
	}
}

func TestReadBatch(t *testing.T) {
	var b strings.Builder
	b.WriteString("study_id,time,kind,value\n")
	for i := 0; i < 25; i++ {
		if i%10 == 3 {
			b.WriteString("S-1,bad,hr,60\n")
			continue
		}
		b.WriteString("S-1,2026-03-02T07:15:00Z,hr,60\n")
	}
	src := NewCSVReader(strings.NewReader(b.String()), "b.csv")
	var total, rejected, batches int
	for {
		rows, rejs, err := ReadBatch(src, nil, nil, 10)
		total += len(rows)
		rejected += len(rejs)
		batches++
		if len(rows) > 10 {
			t.Fatalf("batch of %d rows, max 10", len(rows))
		}
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatal(err)
		}
	}
	if total != 22 || rejected != 3 || batches != 3 {
		t.Errorf("rows %d, rejected %d, batches %d; want 22, 3, 3", total, rejected, batches)
	}
}

func TestCSVReaderInternsStudyIDs(t *testing.T) {
	in := "study_id,time,kind,value\nS-1,2026-03-02T07:15:00Z,hr,60\nS-2,2026-03-02T07:15:00Z,hr,60\nS-1,2026-03-02T07:16:00Z,hr,61\n"
	rows, _, _ := readAll(t, NewCSVReader(strings.NewReader(in), "i.csv"))
	if len(rows) != 3 || rows[0].StudyID != "S-1" || rows[2].StudyID != "S-1" {
		t.Fatalf("rows = %+v", rows)
	}
	if unsafeStringData(rows[0].StudyID) != unsafeStringData(rows[2].StudyID) {
		t.Errorf("equal study IDs do not share one string")
	}
}

// FuzzCSVReader feeds arbitrary bytes to the readings reader: it must never
// panic, and whatever it accepts must satisfy the row invariants.
func FuzzCSVReader(f *testing.F) {
	f.Add(mustOpen(f, "readings.csv"))
	f.Add(mustOpen(f, "readings_bad.csv"))
	f.Add([]byte("kind,value,time,study_id\nsteps,1,2026-01-01T00:00:00Z,\"a\"\"b\"\n"))
	f.Fuzz(func(t *testing.T, in []byte) {
		src := NewCSVReader(bytes.NewReader(in), "fuzz.csv")
		last := 0
		for src.Next() {
			if rej := src.Rejection(); rej != nil {
				if rej.Reason == 0 || rej.Reason >= numReasons || rej.Line <= last {
					t.Fatalf("bad rejection %+v after line %d", rej, last)
				}
				last = rej.Line
				continue
			}
			r := src.Row()
			if r.StudyID == "" || r.Kind < cohort.HeartRate || r.Kind > cohort.RRInterval || r.V < 0 || r.Line <= last {
				t.Fatalf("bad row %+v after line %d", r, last)
			}
			if (r.Kind != cohort.Steps && r.End != 0) || (r.Kind == cohort.Steps && r.End <= r.T) {
				t.Fatalf("bad interval in %+v", r)
			}
			last = r.Line
		}
		var fe *FileError
		if err := src.Err(); err != nil && !errors.As(err, &fe) {
			t.Fatalf("error %v is not a FileError", err)
		}
	})
}

func unsafeStringData(s string) *byte { return unsafe.StringData(s) }
