package ecg_test

import (
	"cohortdesk/cohort/ecg"
	"encoding/binary"
	"errors"
	"math"
	"strings"
	"testing"
	"time"
)

// edfSig describes one signal of a hand-made EDF file.
type edfSig struct {
	label, transducer, dim, pmin, pmax, dmin, dmax, prefilter, spr string
}

// edfSpec is a hand-made EDF file, written field by field with the order and
// widths of the EDF specification (Kemp B et al. 1992; EDF+ 2003; from memory,
// and the same as the brief's list), independently of EncodeEDF.
type edfSpec struct {
	version, patient, recording, date, time, headerBytes, reserved, records, duration, ns string
	sigs                                                                                  []edfSig
	data                                                                                  []byte
}

// field pads s with spaces to width, as the specification requires.
func field(tb testing.TB, s string, width int) string {
	tb.Helper()
	if len(s) > width {
		tb.Fatalf("%q does not fit in %d bytes", s, width)
	}
	return s + strings.Repeat(" ", width-len(s))
}

func (e edfSpec) bytes(tb testing.TB) []byte {
	tb.Helper()
	var b strings.Builder
	b.WriteString(field(tb, e.version, 8))    // version of this data format
	b.WriteString(field(tb, e.patient, 80))   // local patient identification
	b.WriteString(field(tb, e.recording, 80)) // local recording identification
	b.WriteString(field(tb, e.date, 8))       // startdate dd.mm.yy
	b.WriteString(field(tb, e.time, 8))       // starttime hh.mm.ss
	b.WriteString(field(tb, e.headerBytes, 8))
	b.WriteString(field(tb, e.reserved, 44))
	b.WriteString(field(tb, e.records, 8))  // number of data records
	b.WriteString(field(tb, e.duration, 8)) // duration of a data record, s
	b.WriteString(field(tb, e.ns, 4))       // number of signals
	each := func(get func(edfSig) string, width int) {
		for _, s := range e.sigs {
			b.WriteString(field(tb, get(s), width))
		}
	}
	each(func(s edfSig) string { return s.label }, 16)
	each(func(s edfSig) string { return s.transducer }, 80)
	each(func(s edfSig) string { return s.dim }, 8)
	each(func(s edfSig) string { return s.pmin }, 8)
	each(func(s edfSig) string { return s.pmax }, 8)
	each(func(s edfSig) string { return s.dmin }, 8)
	each(func(s edfSig) string { return s.dmax }, 8)
	each(func(s edfSig) string { return s.prefilter }, 80)
	each(func(s edfSig) string { return s.spr }, 8)
	each(func(edfSig) string { return "" }, 32) // reserved
	return append([]byte(b.String()), e.data...)
}

// le16 appends 16-bit little-endian two's complement values.
func le16(dst []byte, v ...int16) []byte {
	for _, x := range v {
		dst = binary.LittleEndian.AppendUint16(dst, uint16(x))
	}
	return dst
}

// plainSpec is a one-signal EDF file: 2 records of 1 s at 4 samples per
// record, digital -1000..1000 mapped to -500..500 uV, so one digital step is
// 0.5 uV.
func plainSpec(tb testing.TB) edfSpec {
	tb.Helper()
	return edfSpec{
		version: "0", patient: "Canary Patient Zed 01-JAN-1950", recording: "Startdate 02-MAR-2024 canary-rec",
		date: "02.03.24", time: "14.05.09", headerBytes: "512", reserved: "", records: "2", duration: "1", ns: "1",
		sigs: []edfSig{{"ECG I", "AgAgCl electrode", "uV", "-500", "500", "-1000", "1000", "HP:0.5Hz LP:40Hz", "4"}},
		data: le16(nil, 0, 200, -200, 1000, -1000, 2, 4, 6),
	}
}

func TestReadEDFHandMadeHeader(t *testing.T) {
	f, err := ecg.ReadEDF(plainSpec(t).bytes(t), ecg.EDFOptions{})
	if err != nil {
		t.Fatal(err)
	}
	h := f.Header
	if h.Variant != "EDF" || h.HeaderBytes != 512 || h.Records != 2 || h.RecordSeconds != 1 || len(h.Signals) != 1 {
		t.Errorf("header: got %+v", h)
	}
	if want := time.Date(2024, 3, 2, 14, 5, 9, 0, time.UTC); !h.Start.Equal(want) {
		t.Errorf("start: got %v, want %v", h.Start, want)
	}
	s := h.Signals[0]
	want := ecg.EDFSignal{Label: "ECG I", Transducer: "AgAgCl electrode", Dimension: "uV", PhysMin: -500, PhysMax: 500,
		DigMin: -1000, DigMax: 1000, Prefilter: "HP:0.5Hz LP:40Hz", SamplesPerRecord: 4}
	if s != want {
		t.Errorf("signal: got %+v, want %+v", s, want)
	}
	// phys = pmin + (d - dmin) * (pmax - pmin) / (dmax - dmin) (the
	// specification's linear map, from memory): 0.5 uV per step, so d = 200
	// is 100 uV = 0.1 mV.
	wantMV := []float64{0, 0.1, -0.1, 0.5, -0.5, 0.001, 0.002, 0.003}
	if len(f.Waveform.Samples) != len(wantMV) {
		t.Fatalf("got %d samples, want %d", len(f.Waveform.Samples), len(wantMV))
	}
	for i, got := range f.Waveform.Samples {
		if math.Abs(got-wantMV[i]) > 1e-12 {
			t.Errorf("sample %d: got %g mV, want %g mV", i, got, wantMV[i])
		}
	}
	if f.Waveform.RateHz != 4 || f.Waveform.Label != "ECG I" {
		t.Errorf("waveform: rate %g label %q", f.Waveform.RateHz, f.Waveform.Label)
	}
}

func TestReadEDFKeepsIdentificationApart(t *testing.T) {
	f, err := ecg.ReadEDF(plainSpec(t).bytes(t), ecg.EDFOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(f.Identity.Patient, "Canary Patient Zed") || !strings.Contains(f.Identity.Recording, "canary-rec") {
		t.Errorf("identity: got %+v", f.Identity)
	}
	for _, s := range []string{f.Waveform.Source, f.Waveform.Label, strings.Join(f.Header.Warnings, " ")} {
		if strings.Contains(strings.ToLower(s), "canary") {
			t.Errorf("identification leaked into %q", s)
		}
	}
}

func TestReadEDFPlusSkipsAnnotations(t *testing.T) {
	// The annotation signal comes first, so skipping it is tested; each
	// record starts with its time-keeping annotation "+onset" 20 20 0
	// (EDF+ 2003, from memory). The first onset, 1.25 s, moves the start past
	// midnight.
	ann := func(onset string) []byte {
		b := make([]byte, 16) // 8 samples x 2 bytes
		copy(b, "+"+onset+"\x14\x14\x00")
		return b
	}
	var data []byte
	data = append(data, ann("1.25")...)
	data = le16(data, 10, 20, 30)
	data = append(data, ann("2.25")...)
	data = le16(data, 40, 50, 60)
	spec := edfSpec{
		version: "0", patient: "X X X X", recording: "Startdate 02-MAR-2002 X X X",
		date: "02.03.02", time: "23.59.59", headerBytes: "768", reserved: "EDF+C", records: "2", duration: "1", ns: "2",
		sigs: []edfSig{
			{"EDF Annotations", "", "", "-1", "1", "-32768", "32767", "", "8"},
			{"ECG", "", "mV", "-32.768", "32.767", "-32768", "32767", "", "3"},
		},
		data: data,
	}
	f, err := ecg.ReadEDF(spec.bytes(t), ecg.EDFOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if f.Header.Variant != "EDF+C" || f.Header.Chosen != 1 || !f.Header.Signals[0].Annotation {
		t.Errorf("header: got %+v", f.Header)
	}
	want := []float64{0.010, 0.020, 0.030, 0.040, 0.050, 0.060}
	for i, got := range f.Waveform.Samples {
		if math.Abs(got-want[i]) > 1e-12 {
			t.Errorf("sample %d: got %g, want %g", i, got, want[i])
		}
	}
	if wantT := time.Date(2002, 3, 3, 0, 0, 0, 250e6, time.UTC); !f.Waveform.Start.Equal(wantT) {
		t.Errorf("start: got %v, want %v", f.Waveform.Start, wantT)
	}

	// The same file as EDF+D with contiguous records reads; with a gap it is
	// refused, naming the record.
	spec.reserved = "EDF+D"
	if _, err := ecg.ReadEDF(spec.bytes(t), ecg.EDFOptions{}); err != nil {
		t.Errorf("contiguous EDF+D: %v", err)
	}
	spec.data = append(append(append(append([]byte{}, ann("0")...), le16(nil, 1, 2, 3)...), ann("5")...), le16(nil, 4, 5, 6)...)
	_, err = ecg.ReadEDF(spec.bytes(t), ecg.EDFOptions{})
	var ie *ecg.InputError
	if !errors.Is(err, ecg.ErrUnsupported) || !errors.As(err, &ie) || ie.Record != 2 {
		t.Errorf("EDF+D with a gap: got %v", err)
	}
}

func TestReadEDFUnitsAndLabels(t *testing.T) {
	tests := []struct {
		dim   string
		label string
		want  float64 // mV for digital 200 (100 units)
	}{
		{"uV", "", 0.1},
		{"mV", "", 100},
		{"V", "", 100000},
		{"nV", "", 0.0001},
		{"uV", "ecg i", 0.1}, // labels match case-insensitively
	}
	for _, tt := range tests {
		spec := plainSpec(t)
		spec.sigs[0].dim = tt.dim
		f, err := ecg.ReadEDF(spec.bytes(t), ecg.EDFOptions{Label: tt.label})
		if err != nil {
			t.Errorf("%s: %v", tt.dim, err)
			continue
		}
		if got := f.Waveform.Samples[1]; math.Abs(got-tt.want) > 1e-9*tt.want {
			t.Errorf("%s: got %g mV, want %g mV", tt.dim, got, tt.want)
		}
	}
	if _, err := ecg.ReadEDF(plainSpec(t).bytes(t), ecg.EDFOptions{Label: "ECG II"}); err == nil || !strings.Contains(err.Error(), `"ECG I"`) {
		t.Errorf("unknown label: got %v, want the available labels listed", err)
	}
}

// A digital value outside the declared range is clipped to it, as common
// EDF readers do, and the header says how many were: the plain file's
// digital range is -1000..1000 for -500..500 uV, so 1500 reads as 500 uV
// and -2000 as -500 uV (hand-worked).
func TestReadEDFClipsToTheDigitalRange(t *testing.T) {
	spec := plainSpec(t)
	spec.data = le16(nil, 0, 1500, -200, 1000, -2000, 2, 4, 6)
	f, err := ecg.ReadEDF(spec.bytes(t), ecg.EDFOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if got := f.Waveform.Samples; got[1] != 0.5 || got[4] != -0.5 || got[3] != 0.5 {
		t.Errorf("samples %v, want 1500 and -2000 clipped to 0.5 and -0.5 mV", got)
	}
	want := `signal 1 "ECG I": 2 samples outside the declared digital range -1000..1000 clipped to it`
	if len(f.Header.Warnings) != 1 || f.Header.Warnings[0] != want {
		t.Errorf("warnings %q, want %q", f.Header.Warnings, want)
	}
	if l := f.Leads[0].Limits; l.Min != -0.5 || l.Max != 0.5 {
		t.Errorf("limits %+v, want -0.5..0.5 mV", l)
	}
}

func TestReadEDFUnknownRecordCount(t *testing.T) {
	// -1 records: the count comes from the file length (EDF+ 2003 allows -1
	// while recording only; from memory).
	spec := plainSpec(t)
	spec.records = "-1"
	f, err := ecg.ReadEDF(spec.bytes(t), ecg.EDFOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if f.Header.Records != 2 || len(f.Waveform.Samples) != 8 {
		t.Errorf("got %d records, %d samples; want 2, 8", f.Header.Records, len(f.Waveform.Samples))
	}
	spec.data = spec.data[:len(spec.data)-2] // a partial last record is left out
	f, err = ecg.ReadEDF(spec.bytes(t), ecg.EDFOptions{})
	if err != nil || f.Header.Records != 1 || len(f.Header.Warnings) != 1 {
		t.Errorf("partial record: got %d records, warnings %q, err %v", f.Header.Records, f.Header.Warnings, err)
	}
}

func TestReadEDFErrors(t *testing.T) {
	tests := []struct {
		name   string
		edit   func(*edfSpec)
		raw    func([]byte) []byte
		field  string
		offset int64
		record int
		is     error
	}{
		{name: "bad version", edit: func(e *edfSpec) { e.version = "1" }, field: "version", offset: 0},
		{name: "24-bit variant", raw: func(b []byte) []byte { b[0] = 0xFF; return b }, field: "version", offset: 0, is: ecg.ErrUnsupported},
		{name: "short file", raw: func(b []byte) []byte { return b[:100] }, field: "fixed header", offset: 100, is: ecg.ErrTruncated},
		{name: "non-numeric records", edit: func(e *edfSpec) { e.records = "two" }, field: "number of data records", offset: 236},
		{name: "non-numeric duration", edit: func(e *edfSpec) { e.duration = "NaN" }, field: "duration of a data record", offset: 244},
		{name: "zero duration", edit: func(e *edfSpec) { e.duration = "0" }, field: "duration of a data record", offset: 244},
		{name: "header length mismatch", edit: func(e *edfSpec) { e.headerBytes = "768" }, field: "number of bytes in header record", offset: 184},
		{name: "no signals", edit: func(e *edfSpec) { e.ns = "0" }, field: "number of signals", offset: 252},
		{name: "too many signals", edit: func(e *edfSpec) { e.ns = "600" }, field: "number of signals", offset: 252},
		{name: "bad date", edit: func(e *edfSpec) { e.date = "31.02.24" }, field: "startdate", offset: 168},
		{name: "bad time", edit: func(e *edfSpec) { e.time = "25.00.00" }, field: "starttime", offset: 176},
		// Per-signal fields of signal 1 of 1: label at 256, transducer 272,
		// dimension 352, physical min 360, max 368, digital min 376, max
		// 384, prefiltering 392, samples per record 472.
		{name: "digital min not below max", edit: func(e *edfSpec) { e.sigs[0].dmin = "1000" }, field: "digital minimum", offset: 376},
		{name: "digital max beyond 16 bits", edit: func(e *edfSpec) { e.sigs[0].dmax = "40000" }, field: "digital maximum", offset: 384},
		{name: "physical min equals max", edit: func(e *edfSpec) { e.sigs[0].pmin = "500" }, field: "physical minimum", offset: 360},
		{name: "non-numeric physical max", edit: func(e *edfSpec) { e.sigs[0].pmax = "5OO" }, field: "physical maximum", offset: 368},
		{name: "unknown dimension", edit: func(e *edfSpec) { e.sigs[0].dim = "mmHg" }, field: "physical dimension", offset: 352},
		{name: "zero samples per record", edit: func(e *edfSpec) { e.sigs[0].spr = "0" }, field: "number of samples in each data record", offset: 472},
		{name: "absurd rate", edit: func(e *edfSpec) { e.sigs[0].spr = "4"; e.duration = "0.00001" }, field: "number of samples in each data record", offset: 472},
		{name: "truncated data", edit: func(e *edfSpec) { e.records = "3" }, offset: 512 + 16, record: 3, is: ecg.ErrTruncated},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			spec := plainSpec(t)
			if tt.edit != nil {
				tt.edit(&spec)
			}
			b := spec.bytes(t)
			if tt.raw != nil {
				b = tt.raw(b)
			}
			_, err := ecg.ReadEDF(b, ecg.EDFOptions{})
			var ie *ecg.InputError
			if !errors.As(err, &ie) {
				t.Fatalf("got %v, want an *InputError", err)
			}
			if !errors.Is(err, ecg.ErrFormat) {
				t.Errorf("%v does not match ErrFormat", err)
			}
			if tt.is != nil && !errors.Is(err, tt.is) {
				t.Errorf("%v does not match %v", err, tt.is)
			}
			if ie.Field != tt.field || ie.Offset != tt.offset || ie.Record != tt.record {
				t.Errorf("got field %q offset %d record %d, want %q %d %d (%v)", ie.Field, ie.Offset, ie.Record, tt.field, tt.offset, tt.record, err)
			}
			if tt.field != "" && !strings.Contains(err.Error(), tt.field) {
				t.Errorf("message %q does not name the field", err)
			}
		})
	}
}

func TestReadEDFStartYear(t *testing.T) {
	// Two-digit years clip at 1985: 85-99 are 19xx, 00-84 are 20xx; EDF+
	// takes the full year from "Startdate dd-MMM-yyyy" and allows "yy" in
	// the header after 2084 (EDF+ 2003, from memory).
	tests := []struct {
		date, recording, reserved string
		wantYear                  int
	}{
		{"02.03.85", "", "", 1985},
		{"02.03.99", "", "", 1999},
		{"02.03.00", "", "", 2000},
		{"02.03.84", "", "", 2084},
		{"02.03.yy", "Startdate 02-MAR-2091 X X X", "EDF+C", 2091},
		{"02.03.24", "Startdate 02-MAR-2024 X X X", "EDF+C", 2024},
	}
	for _, tt := range tests {
		spec := plainSpec(t)
		spec.date, spec.recording, spec.reserved = tt.date, tt.recording, tt.reserved
		f, err := ecg.ReadEDF(spec.bytes(t), ecg.EDFOptions{})
		if err != nil {
			t.Errorf("%s: %v", tt.date, err)
			continue
		}
		if got := f.Waveform.Start.Year(); got != tt.wantYear {
			t.Errorf("%s %q: year %d, want %d", tt.date, tt.recording, got, tt.wantYear)
		}
	}
	spec := plainSpec(t)
	spec.date = "02.03.yy"
	if _, err := ecg.ReadEDF(spec.bytes(t), ecg.EDFOptions{}); err == nil {
		t.Error(`"yy" in plain EDF: got no error`)
	}
	loc := time.FixedZone("study", 2*3600)
	f, err := ecg.ReadEDF(plainSpec(t).bytes(t), ecg.EDFOptions{Location: loc})
	if err != nil {
		t.Fatal(err)
	}
	if want := time.Date(2024, 3, 2, 12, 5, 9, 0, time.UTC); !f.Waveform.Start.Equal(want) {
		t.Errorf("start in a +02:00 zone: got %v, want %v", f.Waveform.Start.UTC(), want)
	}
}
