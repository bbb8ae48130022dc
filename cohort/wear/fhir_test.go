package wear

import (
	"bufio"
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"strings"
	"testing"

	"cohortdesk/cohort"
)

// bundleOf wraps resources (JSON texts) as the entries of a collection Bundle.
func bundleOf(resources ...string) string {
	var b strings.Builder
	b.WriteString(`{"resourceType":"Bundle","type":"collection","entry":[`)
	for i, r := range resources {
		if i > 0 {
			b.WriteString(",\n")
		}
		fmt.Fprintf(&b, `{"fullUrl":"urn:uuid:entry-%d","resource":%s}`, i, r)
	}
	b.WriteString("]}\n")
	return b.String()
}

// TestFHIRSpecHeartRateExample reads the FHIR R4 specification's Observation
// example "heart-rate" (id heart-rate, vital-signs profile, LOINC 8867-4,
// 44 beats/minute with UCUM code /min, subject Patient/example,
// effectiveDateTime 1999-07-02).
//
// Source, verified: HL7 FHIR R4 (v4.0.1), observation-example-heart-rate.json,
// published at hl7.org/fhir/r4/observation-example-heart-rate.json.html; read
// in stored copies of that page and of the same example's JSON in later
// builds of the specification, which agree element for element.
// testdata/fhir-r4-observation-example-heart-rate.json holds the example's
// data elements as published; only the generated narrative (text.div, which
// restates the same values in XHTML) is left out.
func TestFHIRSpecHeartRateExample(t *testing.T) {
	example := string(mustOpen(t, "fhir-r4-observation-example-heart-rate.json"))

	// As published, the time is a bare date. FHIR allows that, but a
	// reading needs an instant to fall in a study week, so it is refused with
	// the date reason, and the rest of the example must have passed the checks
	// that come before the time (status, code, subject, value, unit).
	src := NewFHIRReader(strings.NewReader(bundleOf(example)), "spec.json", FHIROptions{})
	rows, rejs, err := readAll(t, src)
	if err != nil {
		t.Fatal(err)
	}
	if len(rows) != 0 || len(rejs) != 1 || rejs[0].Reason != ReasonImpreciseTime || rejs[0].Field != "effectiveDateTime" {
		t.Fatalf("rows %+v, rejections %+v; want one imprecise_time rejection", rows, rejs)
	}
	if !strings.Contains(rejs[0].Msg, "1999-07-02") || !strings.Contains(rejs[0].Raw, `"id": "heart-rate"`) {
		t.Errorf("rejection does not quote the time and entry: %+v", rejs[0])
	}

	// The same example with only the time made an instant (our change, not
	// the specification's) gives the reading: 44 bpm for subject "example".
	timed := strings.Replace(example, `"1999-07-02"`, `"1999-07-02T08:30:00+02:00"`, 1)
	rows, rejs, err = readAll(t, NewFHIRReader(strings.NewReader(bundleOf(timed)), "spec.json", FHIROptions{}))
	if err != nil || len(rejs) != 0 {
		t.Fatalf("err %v, rejections %+v", err, rejs)
	}
	want := Row{StudyID: "example", Kind: cohort.HeartRate, T: mustMillis(t, "1999-07-02T08:30:00+02:00"), V: 44, Line: 1}
	if len(rows) != 1 || rows[0] != want {
		t.Fatalf("rows = %+v, want %+v", rows, want)
	}
}

// TestFHIRStepsObservation uses a steps Observation we constructed: the R4
// specification publishes no Observation example with LOINC 55423-8 (none
// was found when searching its examples), so this one follows the R4
// Observation resource definition: effectivePeriod for the counting interval,
// valueQuantity with UCUM annotation unit {steps}, category activity.
func TestFHIRStepsObservation(t *testing.T) {
	steps := `{
  "resourceType": "Observation",
  "status": "final",
  "category": [{"coding": [{"system": "http://terminology.hl7.org/CodeSystem/observation-category", "code": "activity"}]}],
  "code": {"coding": [{"system": "http://loinc.org", "code": "55423-8", "display": "Number of steps"}]},
  "subject": {"reference": "https://fhir.example.org/base/Patient/S-0009/_history/3"},
  "effectivePeriod": {"start": "2026-03-02T07:00:00-05:00", "end": "2026-03-02T08:00:00.000-05:00"},
  "valueQuantity": {"value": 1.204e3, "unit": "steps", "system": "http://unitsofmeasure.org", "code": "{steps}"}
}`
	rows, rejs, err := readAll(t, NewFHIRReader(strings.NewReader(bundleOf(steps)), "steps.json", FHIROptions{}))
	if err != nil || len(rejs) != 0 {
		t.Fatalf("err %v, rejections %+v", err, rejs)
	}
	want := Row{StudyID: "S-0009", Kind: cohort.Steps, T: mustMillis(t, "2026-03-02T07:00:00-05:00"),
		End: mustMillis(t, "2026-03-02T08:00:00-05:00"), V: 1204, Line: 1}
	if len(rows) != 1 || rows[0] != want {
		t.Fatalf("rows = %+v, want %+v", rows, want)
	}
}

// entryLines finds the line each Bundle entry starts on in an indented file,
// independently of the reader: the line before each "fullUrl".
func entryLines(tb testing.TB, data []byte) []int {
	tb.Helper()
	var lines []int
	sc := bufio.NewScanner(bytes.NewReader(data))
	for n := 1; sc.Scan(); n++ {
		if strings.Contains(sc.Text(), `"fullUrl"`) {
			lines = append(lines, n-1)
		}
	}
	return lines
}

func TestFHIRBundleFile(t *testing.T) {
	data := mustOpen(t, "bundle.json")
	starts := entryLines(t, data)
	src := NewFHIRReader(bytes.NewReader(data), "bundle.json", FHIROptions{})
	rows, rejs, err := readAll(t, src)
	if err != nil {
		t.Fatal(err)
	}
	// testdata/bundle.json, entry by entry:
	//	0 Patient                                  passed over (other resource)
	//	1 heart rate 64 /min                       row
	//	2 steps 112 {steps} over one minute        row
	//	3 heart rate, entered-in-error             skipped and counted
	//	4 heart rate, preliminary                  not_final
	//	5 body temperature (LOINC 8310-5)          unknown_code
	//	6 heart rate in /h                         wrong_unit
	//	7 heart rate with only dataAbsentReason    missing_value
	//	8 steps with effectiveDateTime, no period  missing_end
	//	9 heart rate for Group/walkers             unknown_subject
	//	10 heart rate 72.5 /min                    row, 73 bpm
	wantRows := []Row{
		{"S-0001", cohort.HeartRate, mustMillis(t, "2026-03-02T07:15:00-05:00"), 0, 64, starts[1]},
		{"S-0001", cohort.Steps, mustMillis(t, "2026-03-02T07:15:00-05:00"), mustMillis(t, "2026-03-02T07:16:00-05:00"), 112, starts[2]},
		{"S-0001", cohort.HeartRate, mustMillis(t, "2026-03-02T12:23:00Z"), 0, 73, starts[10]},
	}
	if len(rows) != len(wantRows) {
		t.Fatalf("rows = %+v", rows)
	}
	for i := range rows {
		if rows[i] != wantRows[i] {
			t.Errorf("row %d = %+v, want %+v", i, rows[i], wantRows[i])
		}
	}
	wantRej := map[int]Reason{4: ReasonNotFinal, 5: ReasonUnknownCode, 6: ReasonWrongUnit,
		7: ReasonMissingValue, 8: ReasonMissingEnd, 9: ReasonUnknownSubject}
	if len(rejs) != len(wantRej) {
		t.Fatalf("rejections = %+v", rejs)
	}
	for _, rej := range rejs {
		if rej.Reason != wantRej[rej.Entry] {
			t.Errorf("entry %d: %v (%s), want %v", rej.Entry, rej.Reason, rej.Msg, wantRej[rej.Entry])
		}
		if rej.Line != starts[rej.Entry] {
			t.Errorf("entry %d: line %d, want %d", rej.Entry, rej.Line, starts[rej.Entry])
		}
		if rej.Offset < 0 || !bytes.HasPrefix(data[rej.Offset:], []byte(rej.Raw)) {
			t.Errorf("entry %d: offset %d does not point at the raw entry", rej.Entry, rej.Offset)
		}
		var raw map[string]any
		if err := json.Unmarshal([]byte(rej.Raw), &raw); err != nil || raw["fullUrl"] != fmt.Sprintf("urn:uuid:6f1c2a40-0000-4000-8000-%012d", rej.Entry) {
			t.Errorf("entry %d: raw is not the entry's JSON (%v): %.80q", rej.Entry, err, rej.Raw)
		}
	}
	wantStats := FHIRStats{Entries: 11, Observations: 10, OtherResources: 1, EnteredInError: 1}
	if got := src.Stats(); got != wantStats {
		t.Errorf("stats = %+v, want %+v", got, wantStats)
	}
}

func TestFHIRObservationRules(t *testing.T) {
	obs := func(fields string) string {
		return `{"resourceType":"Observation","status":"final",` +
			`"code":{"coding":[{"system":"http://loinc.org","code":"8867-4"}]},` +
			`"subject":{"reference":"Patient/S-1"},` + fields + `}`
	}
	hr := `"valueQuantity":{"value":60,"system":"http://unitsofmeasure.org","code":"/min"}`
	at := `"effectiveDateTime":"2026-03-02T07:15:00Z"`
	tests := []struct {
		name     string
		resource string
		why      Reason // 0: a row
		v        int32
	}{
		{"instant", obs(`"effectiveInstant":"2026-03-02T07:15:00Z",` + hr), 0, 60},
		{"period start for heart rate", obs(`"effectivePeriod":{"start":"2026-03-02T07:15:00Z"},` + hr), 0, 60},
		{"unit text without code", obs(at + `,"valueQuantity":{"value":61,"unit":"beats/minute"}`), 0, 61},
		{"annotated UCUM code", obs(at + `,"valueQuantity":{"value":62,"system":"http://unitsofmeasure.org","code":"{beats}/min"}`), 0, 62},
		{"amended", strings.Replace(obs(at+","+hr), `"final"`, `"amended"`, 1), 0, 60},
		{"no offset", obs(`"effectiveDateTime":"2026-03-02T07:15:00",` + hr), ReasonNoOffset, 0},
		{"minutes only", obs(`"effectiveDateTime":"2026-03-02T07:15Z",` + hr), ReasonBadTime, 0},
		{"timing", obs(`"effectiveTiming":{"event":["2026-03-02T07:15:00Z"]},` + hr), ReasonBadTime, 0},
		{"no effective", obs(hr), ReasonMissingField, 0},
		{"no unit", obs(at + `,"valueQuantity":{"value":60}`), ReasonWrongUnit, 0},
		{"other unit system", obs(at + `,"valueQuantity":{"value":60,"system":"urn:x-local","code":"/min"}`), ReasonWrongUnit, 0},
		{"negative", obs(at + `,"valueQuantity":{"value":-5,"code":"/min"}`), ReasonOutOfRange, 0},
		{"value as string", obs(at + `,"valueQuantity":{"value":"sixty","code":"/min"}`), ReasonMalformed, 0},
		{"code of wrong type", `{"resourceType":"Observation","status":"final","code":"8867-4"}`, ReasonMalformed, 0},
		{"no status", strings.Replace(obs(at+","+hr), `"status":"final",`, ``, 1), ReasonNotFinal, 0},
		{"no subject", strings.Replace(obs(at+","+hr), `"subject":{"reference":"Patient/S-1"},`, ``, 1), ReasonUnknownSubject, 0},
		{"contained subject", strings.Replace(obs(at+","+hr), `Patient/S-1`, `#p1`, 1), ReasonUnknownSubject, 0},
		{"no coding", strings.Replace(obs(at+","+hr), `{"coding":[{"system":"http://loinc.org","code":"8867-4"}]}`, `{"text":"pulse"}`, 1), ReasonUnknownCode, 0},
		{"code from another system", strings.Replace(obs(at+","+hr), `http://loinc.org`, `http://snomed.info/sct`, 1), ReasonUnknownCode, 0},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			rows, rejs, err := readAll(t, NewFHIRReader(strings.NewReader(bundleOf(tt.resource)), "o.json", FHIROptions{}))
			if err != nil {
				t.Fatal(err)
			}
			if tt.why == 0 {
				if len(rows) != 1 || rows[0].V != tt.v || len(rejs) != 0 {
					t.Fatalf("rows %+v rejections %+v, want one row of %d", rows, rejs, tt.v)
				}
				return
			}
			if len(rejs) != 1 || rejs[0].Reason != tt.why {
				t.Fatalf("rows %+v rejections %+v, want %v", rows, rejs, tt.why)
			}
		})
	}
}

func TestFHIRMapSubject(t *testing.T) {
	res := `{"resourceType":"Observation","status":"final",
		"code":{"coding":[{"system":"http://loinc.org","code":"8867-4"}]},
		"subject":{"identifier":{"system":"urn:x-study:ids","value":"S-0077"}},
		"effectiveDateTime":"2026-03-02T07:15:00Z",
		"valueQuantity":{"value":60,"code":"/min"}}`
	opt := FHIROptions{MapSubject: func(s FHIRSubject) (string, bool) {
		return s.IdentifierValue, s.IdentifierSystem == "urn:x-study:ids"
	}}
	rows, rejs, err := readAll(t, NewFHIRReader(strings.NewReader(bundleOf(res)), "m.json", opt))
	if err != nil || len(rejs) != 0 || len(rows) != 1 || rows[0].StudyID != "S-0077" {
		t.Fatalf("rows %+v rejections %+v err %v", rows, rejs, err)
	}
}

func TestPatientID(t *testing.T) {
	tests := []struct {
		ref  string
		want string
		ok   bool
	}{
		{"Patient/S-1", "S-1", true},
		{"https://h.example/fhir/Patient/S-1", "S-1", true},
		{"Patient/S-1/_history/2", "S-1", true},
		{"Patient/", "", false},
		{"Group/S-1", "", false},
		{"#p", "", false},
		{"", "", false},
	}
	for _, tt := range tests {
		got, ok := PatientID(FHIRSubject{Reference: tt.ref})
		if got != tt.want || ok != tt.ok {
			t.Errorf("PatientID(%q) = %q, %v; want %q, %v", tt.ref, got, ok, tt.want, tt.ok)
		}
	}
}

func TestFHIRFileErrors(t *testing.T) {
	good := bundleOf(`{"resourceType":"Patient"}`)
	tests := []struct {
		name string
		in   string
		want error
		line int
	}{
		{"empty", "", ErrEmptyFile, 0},
		{"array", "[]", ErrNotBundle, 0},
		{"other resource", `{"resourceType":"Observation","status":"final"}`, ErrNotBundle, 1},
		{"no resourceType", `{"entry":[]}`, ErrNotBundle, 0},
		{"entry not array", `{"resourceType":"Bundle","entry":{}}`, ErrNotBundle, 1},
		{"syntax error in entry", "{\"resourceType\":\"Bundle\",\"entry\":[\n{\"resource\":{\"resourceType\":\"Patient\"}},\n{\"resource\": {,}}]}", ErrSyntax, 3},
		{"truncated", good[:len(good)-5], ErrSyntax, 0},
		{"trailing data", good + `{"x":1}`, ErrTrailingData, 0},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			_, _, err := readAll(t, NewFHIRReader(strings.NewReader(tt.in), "e.json", FHIROptions{}))
			var fe *FileError
			if !errors.As(err, &fe) || !errors.Is(err, tt.want) {
				t.Fatalf("err = %v, want a FileError wrapping %v", err, tt.want)
			}
			if tt.line != 0 && fe.Line != tt.line {
				t.Errorf("line %d, want %d (%v)", fe.Line, tt.line, err)
			}
		})
	}
}

// TestFHIRBoundedMemory checks that an entry beyond the size bound stops the
// file instead of growing the buffer, while smaller entries before it pass.
func TestFHIRBoundedMemory(t *testing.T) {
	small := `{"resourceType":"Patient"}`
	huge := `{"resourceType":"Patient","text":{"div":"` + strings.Repeat("x", 1<<20) + `"}}`
	src := NewFHIRReader(strings.NewReader(bundleOf(small, small, huge, small)), "big.json", FHIROptions{MaxEntryBytes: 64 << 10})
	_, _, err := readAll(t, src)
	if !errors.Is(err, ErrEntryTooLarge) {
		t.Fatalf("err = %v, want ErrEntryTooLarge", err)
	}
	if got := src.Stats().Entries; got != 2 {
		t.Errorf("entries read before the large one = %d, want 2", got)
	}
}

// TestFHIRManyEntries streams a generated bundle and checks every entry
// comes out once, in order, with the right line.
func TestFHIRManyEntries(t *testing.T) {
	const n = 3000
	data := genBundle(n)
	rows, rejs, err := readAll(t, NewFHIRReader(bytes.NewReader(data), "gen.json", FHIROptions{}))
	if err != nil || len(rejs) != 0 || len(rows) != n {
		t.Fatalf("rows %d rejections %d err %v", len(rows), len(rejs), err)
	}
	for i, r := range rows {
		if r.Line != i+2 {
			t.Fatalf("row %d on line %d, want %d", i, r.Line, i+2)
		}
	}
}

// FuzzFHIRReader feeds arbitrary bytes to the Bundle reader: it must never
// panic, and whatever it accepts must satisfy the row invariants.
func FuzzFHIRReader(f *testing.F) {
	f.Add(mustOpen(f, "bundle.json"))
	f.Add([]byte(bundleOf(string(mustOpen(f, "fhir-r4-observation-example-heart-rate.json")))))
	f.Add(genBundle(3))
	f.Add([]byte(`{"resourceType":"Bundle","entry":[{"resource":{"resourceType":"Observation","status":"final","code":{"coding":[{"system":"http://loinc.org","code":"55423-8"}]},"subject":{"reference":"Patient/a"},"effectivePeriod":{"start":"2026-01-01T00:00:00Z","end":"2026-01-01T00:01:00Z"},"valueQuantity":{"value":5,"code":"{steps}"}}}]}`))
	f.Fuzz(func(t *testing.T, in []byte) {
		src := NewFHIRReader(bytes.NewReader(in), "fuzz.json", FHIROptions{MaxEntryBytes: 1 << 16})
		for src.Next() {
			if rej := src.Rejection(); rej != nil {
				if rej.Reason == 0 || rej.Reason >= numReasons || rej.Entry < 0 {
					t.Fatalf("bad rejection %+v", rej)
				}
				continue
			}
			r := src.Row()
			if r.StudyID == "" || (r.Kind != cohort.HeartRate && r.Kind != cohort.Steps) || r.V < 0 {
				t.Fatalf("bad row %+v", r)
			}
			if r.Kind == cohort.Steps && r.End <= r.T {
				t.Fatalf("bad interval %+v", r)
			}
		}
		var fe *FileError
		if err := src.Err(); err != nil && !errors.As(err, &fe) {
			t.Fatalf("error %v is not a FileError", err)
		}
	})
}

// streamBundle produces a Bundle of n heart-rate entries on the fly, so a
// test can read a file far larger than anything it holds.
type streamBundle struct {
	n, i int
	buf  []byte
	done bool
}

func (s *streamBundle) Read(p []byte) (int, error) {
	for len(s.buf) == 0 {
		switch {
		case s.done:
			return 0, io.EOF
		case s.i == 0 && s.n > 0 && s.buf == nil:
			s.buf = []byte(`{"resourceType":"Bundle","type":"collection","entry":[` + "\n")
			continue
		case s.i < s.n:
			sep := ",\n"
			if s.i == s.n-1 {
				sep = "\n"
			}
			s.buf = fmt.Appendf(s.buf[:0], `{"resource":{"resourceType":"Observation","status":"final",`+
				`"text":{"status":"generated","div":"<div>%s</div>"},`+
				`"code":{"coding":[{"system":"http://loinc.org","code":"8867-4"}]},"subject":{"reference":"Patient/S-%d"},`+
				`"effectiveDateTime":"2026-03-02T07:15:00Z","valueQuantity":{"value":%d,"code":"/min"}}}%s`,
				strings.Repeat("narrative ", 50), s.i%100, 50+s.i%70, sep)
			s.i++
		default:
			s.buf = append(s.buf[:0], "]}\n"...)
			s.done = true
		}
	}
	n := copy(p, s.buf)
	s.buf = s.buf[n:]
	return n, nil
}

// TestFHIRStreamsInBoundedMemory reads a Bundle of about 24 MB and checks the bytes
// the reader holds never exceed a small bound, however long the file.
func TestFHIRStreamsInBoundedMemory(t *testing.T) {
	n := 30000
	if testing.Short() {
		n = 3000
	}
	src := NewFHIRReader(&streamBundle{n: n}, "stream.json", FHIROptions{})
	rows, maxHeld := 0, 0
	for src.Next() {
		if rej := src.Rejection(); rej != nil {
			t.Fatal(rej)
		}
		rows++
		maxHeld = max(maxHeld, cap(src.tr.pending))
	}
	if err := src.Err(); err != nil || rows != n {
		t.Fatalf("%d rows, %v", rows, err)
	}
	if maxHeld > 64<<10 {
		t.Errorf("reader held up to %d bytes for entries under 1 KiB", maxHeld)
	}
	t.Logf("%d entries, %d bytes read, at most %d bytes held", n, src.tr.base, maxHeld)
}
