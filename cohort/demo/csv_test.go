package demo

import (
	"bytes"
	"encoding/csv"
	"errors"
	"io"
	"math/rand/v2"
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"
)

// readCSV parses readings CSV with the standard library's RFC 4180 reader.
func readCSV(tb testing.TB, b []byte) [][]string {
	tb.Helper()
	r := csv.NewReader(bytes.NewReader(b))
	r.FieldsPerRecord = 5
	rows, err := r.ReadAll()
	if err != nil {
		tb.Fatalf("reading CSV back: %v", err)
	}
	return rows
}

func TestCSVRoundTrip(t *testing.T) {
	s := mustDefault(t)
	// A participant with all three kinds, and one living in a zone without
	// daylight saving time.
	var picks []Participant
	for _, p := range s.Participants {
		if p.HasRR && s.WeekCount(p) >= 2 && len(picks) == 0 {
			picks = append(picks, p)
		}
	}
	for _, p := range s.Participants {
		if p.TimeZone == "America/Phoenix" && s.WeekCount(p) >= 1 {
			picks = append(picks, p)
			break
		}
	}
	for _, p := range picks {
		w, _ := s.Week(p, 1%s.WeekCount(p))
		var buf bytes.Buffer
		cw := NewCSVWriter(&buf)
		if err := cw.WriteWeek(p, w); err != nil {
			t.Fatal(err)
		}
		if err := cw.Flush(); err != nil {
			t.Fatal(err)
		}
		rows := readCSV(t, buf.Bytes())
		if got := strings.Join(rows[0], ","); got != CSVHeader {
			t.Fatalf("header %q, want %q", got, CSVHeader)
		}
		rows = rows[1:]
		if len(rows) != Readings(&w) {
			t.Fatalf("%s: %d rows for %d readings", p.StudyID, len(rows), Readings(&w))
		}
		var got cohort.Week
		prev := int64(0)
		for i, row := range rows {
			at, err := time.Parse(time.RFC3339, row[1])
			if err != nil {
				t.Fatalf("row %d: time %q: %v", i+2, row[1], err)
			}
			_, wantOff := at.In(p.Loc).Zone()
			if _, off := at.Zone(); off != wantOff {
				t.Errorf("row %d: offset %d s, participant zone has %d s", i+2, off, wantOff)
			}
			ms := at.UnixMilli()
			if ms < prev {
				t.Errorf("row %d: time goes back", i+2)
			}
			prev = ms
			v, err := strconv.Atoi(row[3])
			if err != nil || row[0] != p.StudyID {
				t.Fatalf("row %d: %q", i+2, row)
			}
			k, err := cohort.ParseKind(row[2])
			if err != nil {
				t.Fatalf("row %d: %v", i+2, err)
			}
			switch k {
			case cohort.HeartRate:
				got.HR.Append(ms, int32(v))
			case cohort.RRInterval:
				got.RR.Append(ms, int32(v))
			case cohort.Steps:
				end, err := time.Parse(time.RFC3339, row[4])
				if err != nil {
					t.Fatalf("row %d: end %q: %v", i+2, row[4], err)
				}
				got.Steps.AppendInterval(ms, end.UnixMilli(), int32(v))
				continue
			}
			if row[4] != "" {
				t.Errorf("row %d: end_time %q on a %s row", i+2, row[4], row[2])
			}
		}
		for _, pair := range []struct {
			name      string
			got, want *cohort.Samples
		}{{"heart rate", &got.HR, &w.HR}, {"steps", &got.Steps, &w.Steps}, {"rr", &got.RR, &w.RR}} {
			if !slices.Equal(pair.got.T, pair.want.T) || !slices.Equal(pair.got.V, pair.want.V) || !slices.Equal(pair.got.End, pair.want.End) {
				t.Errorf("%s: %s does not survive the CSV round trip", p.StudyID, pair.name)
			}
		}
	}
}

func TestAppendTimeMatchesTimePackage(t *testing.T) {
	// Reference: the time package's own formatting of the same instant.
	const layout = "2006-01-02T15:04:05.999Z07:00"
	var zones []*time.Location
	for _, name := range []string{"UTC", "America/Chicago", "America/Denver", "America/Phoenix", "America/St_Johns", "Asia/Kathmandu"} {
		l, err := time.LoadLocation(name)
		if err != nil {
			t.Fatal(err)
		}
		zones = append(zones, l)
	}
	chi := zones[1]
	fixed := []time.Time{
		time.Date(2026, 3, 8, 1, 59, 59, 999e6, chi), // just before spring forward
		time.Date(2026, 3, 8, 3, 0, 0, 0, chi),
		time.Date(2026, 11, 1, 1, 30, 0, 0, chi), // ambiguous hour
		time.Date(2026, 11, 1, 1, 30, 0, 0, chi).Add(time.Hour),
		time.Date(2000, 2, 29, 23, 59, 59, 120e6, time.UTC),
		time.Date(1969, 12, 31, 23, 59, 59, 1e6, time.UTC),
		time.Date(2100, 3, 1, 0, 0, 0, 500e6, time.UTC),
	}
	r := rand.New(rand.NewPCG(1, 2))
	for range 20000 {
		fixed = append(fixed, time.UnixMilli(r.Int64N(4102444800000)))
	}
	var z zoneCache
	for _, at := range fixed {
		for _, loc := range zones {
			want := at.In(loc).Format(layout)
			if got := string(z.appendTime(nil, loc, at.UnixMilli())); got != want {
				t.Fatalf("appendTime(%d, %s) = %q, want %q", at.UnixMilli(), loc, got, want)
			}
		}
	}
}

func TestCivilMatchesTimePackage(t *testing.T) {
	for d := int64(-800_000); d <= 800_000; d += 37 {
		ty, tm, td := time.Unix(d*86400, 0).UTC().Date()
		y, m, dd := civil(d)
		if y != int64(ty) || m != int(tm) || dd != td {
			t.Fatalf("civil(%d) = %d-%d-%d, want %d-%d-%d", d, y, m, dd, ty, tm, td)
		}
	}
}

func TestBadRows(t *testing.T) {
	s := mustDefault(t)
	rows := s.BadRows()
	if len(rows) < 10 {
		t.Fatalf("%d bad rows, want a varied set", len(rows))
	}
	var buf bytes.Buffer
	cw := NewCSVWriter(&buf)
	for _, r := range rows {
		if r.Problem == "" {
			t.Errorf("bad row without a problem: %+v", r)
		}
		if err := cw.WriteBad(r); err != nil {
			t.Fatal(err)
		}
	}
	if err := cw.Flush(); err != nil {
		t.Fatal(err)
	}
	back := readCSV(t, buf.Bytes())[1:]
	if len(back) != len(rows) {
		t.Fatalf("%d rows read back, want %d", len(back), len(rows))
	}
	find := func(problem string) BadRow {
		t.Helper()
		for _, r := range rows {
			if strings.Contains(r.Problem, problem) {
				return r
			}
		}
		t.Fatalf("no bad row for %q", problem)
		return BadRow{}
	}
	if r := find("300 bpm"); r.Value != "300" || r.Kind != "heart_rate" {
		t.Errorf("implausible row %+v", r)
	}
	{
		r := find("future")
		at, err := time.Parse(time.RFC3339, r.Time)
		if err != nil || !at.After(s.Today) {
			t.Errorf("future row %+v (%v)", r, err)
		}
	}
	{
		r := find("check letter")
		if _, _, err := ParseStudyID(r.StudyID); err == nil {
			t.Errorf("row %+v has a valid study ID", r)
		}
	}
	{
		r := find("not enrolled")
		if _, _, err := ParseStudyID(r.StudyID); err != nil {
			t.Errorf("unenrolled ID %q should be well formed: %v", r.StudyID, err)
		}
		if _, ok := s.Participant(r.StudyID); ok {
			t.Errorf("unenrolled ID %q is enrolled", r.StudyID)
		}
	}
	{
		r := find("duplicate")
		p, _ := s.Participant(r.StudyID)
		w, _ := s.Week(p, 0)
		at, err := time.Parse(time.RFC3339, r.Time)
		if err != nil || w.HR.Len() == 0 || at.UnixMilli() != w.HR.T[0] || r.Value != strconv.Itoa(int(w.HR.V[0])) {
			t.Errorf("duplicate row %+v does not repeat the first reading", r)
		}
	}
	for _, r := range rows {
		if p, ok := s.Participant(r.StudyID); ok && p.Canary {
			t.Errorf("bad row for canary %s", r.StudyID)
		}
	}
}

func TestWriteBadQuotes(t *testing.T) {
	var buf bytes.Buffer
	cw := NewCSVWriter(&buf)
	in := BadRow{StudyID: `QRW-0001-J`, Time: `a,b`, Kind: `say "hi"`, Value: "1\n2", EndTime: ""}
	if err := cw.WriteBad(in); err != nil {
		t.Fatal(err)
	}
	if err := cw.Flush(); err != nil {
		t.Fatal(err)
	}
	rows := readCSV(t, buf.Bytes())
	got := rows[1]
	want := []string{in.StudyID, in.Time, in.Kind, in.Value, in.EndTime}
	if !slices.Equal(got, want) {
		t.Errorf("read back %q, want %q", got, want)
	}
}

// failWriter fails after n bytes, to see errors come back.
type failWriter struct{ n int }

func (f *failWriter) Write(b []byte) (int, error) {
	if f.n < len(b) {
		return 0, errors.New("disk full")
	}
	f.n -= len(b)
	return len(b), nil
}

func TestCSVWriterReportsWriteErrors(t *testing.T) {
	s := mustDefault(t)
	p := s.Participants[0]
	w, _ := s.Week(p, 0)
	cw := NewCSVWriter(&failWriter{n: 1000})
	err := cw.WriteWeek(p, w)
	if err == nil {
		err = cw.Flush()
	}
	if err == nil {
		t.Error("no error from a failing writer")
	}
}

func TestEmptyCSVHasHeader(t *testing.T) {
	var buf bytes.Buffer
	if err := NewCSVWriter(&buf).Flush(); err != nil {
		t.Fatal(err)
	}
	if got, _ := io.ReadAll(&buf); string(got) != CSVHeader+"\n" {
		t.Errorf("empty CSV = %q", got)
	}
}
