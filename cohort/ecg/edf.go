package ecg

import (
	"encoding/binary"
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"
	"time"
)

// Limits of the readers. They are ours: EDF allows up to 9999 signals and any
// rate, but a single-lead screening file never comes close, and bounding them
// keeps a hostile header from steering the reader. The rate bounds are wider
// than CheckRecording's on purpose: a file at 50 Hz is read, and then refused
// for analysis with a message about the recording rather than the file.
const (
	MaxEDFSignals = 512    // signals per EDF file
	MaxFileRateHz = 100000 // samples per second of the signal read
	MinFileRateHz = 1      // ditto, lower bound
)

// Errors wrapped inside InputError, for callers that want to tell them apart.
var (
	// ErrTruncated means the file ends before the header or the data records
	// it announces.
	ErrTruncated = errors.New("file is truncated")
	// ErrUnsupported means valid EDF that this reader does not handle
	// (for example EDF+D with gaps, or the 24-bit variant).
	ErrUnsupported = errors.New("not supported")
)

// The fixed header, from the EDF specification (Kemp B et al. 1992): byte
// offsets and widths of the first 256 bytes.
const (
	edfOffVersion     = 0
	edfOffPatient     = 8
	edfOffRecording   = 88
	edfOffStartDate   = 168
	edfOffStartTime   = 176
	edfOffHeaderBytes = 184
	edfOffReserved    = 192
	edfOffRecords     = 236
	edfOffDuration    = 244
	edfOffSignals     = 252
	edfFixedBytes     = 256
	edfPerSignalBytes = 256
)

// edfSignalFields lists the per-signal header fields in file order with their
// widths; each is stored for all signals before the next field begins.
var edfSignalFields = [...]struct {
	name  string
	width int
}{
	{"label", 16},
	{"transducer type", 80},
	{"physical dimension", 8},
	{"physical minimum", 8},
	{"physical maximum", 8},
	{"digital minimum", 8},
	{"digital maximum", 8},
	{"prefiltering", 80},
	{"number of samples in each data record", 8},
	{"reserved", 32},
}

// edfAnnotationLabel marks the EDF+ annotation channel.
const edfAnnotationLabel = "EDF Annotations"

// EDFOptions steer ReadEDF.
type EDFOptions struct {
	// Label picks the signal whose label matches (case-insensitive, spaces
	// trimmed); it must be in volts. Empty picks the ECG leads by label and
	// unit (Classify, ChooseLead).
	Label string
	// Location is the time zone of the header's start date and time, which EDF
	// stores as local clock time without a zone. Nil means UTC.
	Location *time.Location
}

// EDFSignal is one signal's header, as written in the file.
type EDFSignal struct {
	Label            string
	Transducer       string
	Dimension        string // physical unit, e.g. "uV"
	PhysMin, PhysMax float64
	DigMin, DigMax   int
	Prefilter        string
	SamplesPerRecord int
	Annotation       bool // an EDF+ "EDF Annotations" signal
}

// EDFHeader is the technical part of an EDF header: everything except the
// patient and recording identification.
type EDFHeader struct {
	Variant       string    // "EDF", "EDF+C" or "EDF+D"
	Start         time.Time // zero when the file says the start date is unknown
	HeaderBytes   int
	Records       int     // data records read
	RecordSeconds float64 // duration of one data record
	Signals       []EDFSignal
	Chosen        int      // index into Signals of the lead chosen for analysis
	Warnings      []string // oddities that did not stop reading
}

// EDFIdentity holds the two free-text identification fields of an EDF header.
// They often contain a name, a birth date or a hospital number (EDF+ even
// prescribes "code sex birthdate name"), so they are protected health
// information: do not store or show them; pass them to de-identification or
// drop them.
type EDFIdentity struct {
	Patient   string // "local patient identification", 80 bytes
	Recording string // "local recording identification", 80 bytes
}

// EDFFile is the result of ReadEDF.
type EDFFile struct {
	// Waveform is the lead chosen for analysis, Leads[ChosenLead].Waveform.
	Waveform Waveform
	// Signals lists every signal but the annotation signals; Leads holds
	// the ECG leads among them (or, without any, the unlabelled signals in
	// volts), in file order.
	Signals    []SignalInfo
	Leads      []Lead
	ChosenLead int
	Header     EDFHeader
	Identity   EDFIdentity // PHI; see EDFIdentity
}

// edfReader carries the input and builds positioned errors.
type edfReader struct {
	data []byte
}

func (r *edfReader) fail(field string, off int64, signal, record int, err error) error {
	return &InputError{Format: "edf", Field: field, Offset: off, Signal: signal, Record: record, Err: err}
}

// text decodes a header field. EDF allows printable ASCII only; we read the
// other bytes as Latin-1 (old files write the micro sign that way) and turn
// control bytes into spaces, so a bad byte cannot corrupt a log or a page.
func edfText(b []byte) string {
	var sb strings.Builder
	for _, c := range b {
		switch {
		case c < 32 || c == 127:
			sb.WriteByte(' ')
		case c < 128:
			sb.WriteByte(c)
		default:
			sb.WriteRune(rune(c))
		}
	}
	return strings.TrimSpace(sb.String())
}

// edfInt parses an integer header field.
func edfInt(b []byte) (int, error) {
	s := strings.TrimSpace(string(b))
	if s == "" {
		return 0, errors.New("empty, want an integer")
	}
	v, err := strconv.Atoi(s)
	if err != nil || strings.ContainsAny(s, "_") {
		return 0, fmt.Errorf("%q is not an integer", s)
	}
	return v, nil
}

// ReadEDF reads an EDF or EDF+ file: it lists every signal, reads the ECG
// leads among them (by label and unit, see Classify; or the one signal
// opt.Label names) and converts them to millivolts. A file without an ECG
// signal is refused with the list of what it holds.
//
// Digital values d become physical values with the line through (DigMin,
// PhysMin) and (DigMax, PhysMax), then the physical dimension (nV, uV, µV,
// mV or V, in the spellings mvPerUnit knows) is scaled to mV. A digital
// value outside [DigMin, DigMax] is clipped to the range, and the header's
// warnings say how many were. Annotation signals are skipped. A record
// count of -1 (allowed by the specification only while recording) is
// replaced by the number of whole records in the file. EDF+D files are read
// when their records are contiguous; a real gap is refused, because the
// waveform would otherwise join two moments that are not adjacent.
//
// Errors are *InputError values naming the field, its byte offset, and the
// signal and data record concerned; they match ErrFormat.
func ReadEDF(data []byte, opt EDFOptions) (EDFFile, error) {
	r := &edfReader{data: data}
	var f EDFFile
	if len(data) < edfFixedBytes {
		return f, r.fail("fixed header", int64(len(data)), 0, 0,
			fmt.Errorf("file has %d bytes, the fixed header alone needs %d: %w", len(data), edfFixedBytes, ErrTruncated))
	}
	field := func(off, width int) []byte { return data[off : off+width] }

	// Version.
	if data[0] == 0xFF {
		return f, r.fail("version", edfOffVersion, 0, 0, fmt.Errorf("24-bit variant: %w", ErrUnsupported))
	}
	if v := string(field(edfOffVersion, 8)); strings.TrimRight(v, " ") != "0" {
		return f, r.fail("version", edfOffVersion, 0, 0, fmt.Errorf("%q, want \"0\" padded with spaces", edfText([]byte(v))))
	}
	f.Identity.Patient = edfText(field(edfOffPatient, 80))
	f.Identity.Recording = edfText(field(edfOffRecording, 80))

	h := &f.Header
	reserved := edfText(field(edfOffReserved, 44))
	switch {
	case strings.HasPrefix(reserved, "EDF+C"):
		h.Variant = "EDF+C"
	case strings.HasPrefix(reserved, "EDF+D"):
		h.Variant = "EDF+D"
	case strings.HasPrefix(reserved, "EDF+"):
		return f, r.fail("reserved", edfOffReserved, 0, 0, fmt.Errorf("%q, want EDF+C or EDF+D", reserved))
	default:
		h.Variant = "EDF"
		if reserved != "" {
			h.Warnings = append(h.Warnings, fmt.Sprintf("reserved field (byte %d) is not blank: %q", edfOffReserved, reserved))
		}
	}
	plus := h.Variant != "EDF"

	start, err := edfStart(field(edfOffStartDate, 8), field(edfOffStartTime, 8), plus, f.Identity.Recording, opt.Location)
	if err != nil {
		var fe *fieldErr
		if errors.As(err, &fe) {
			return f, r.fail(fe.field, int64(fe.off), 0, 0, fe.err)
		}
		return f, err
	}
	h.Start = start

	hb, err := edfInt(field(edfOffHeaderBytes, 8))
	if err != nil {
		return f, r.fail("number of bytes in header record", edfOffHeaderBytes, 0, 0, err)
	}
	nrec, err := edfInt(field(edfOffRecords, 8))
	if err != nil {
		return f, r.fail("number of data records", edfOffRecords, 0, 0, err)
	}
	if nrec < -1 {
		return f, r.fail("number of data records", edfOffRecords, 0, 0, fmt.Errorf("%d, want -1 or more", nrec))
	}
	dur, err := parseDecimal(string(field(edfOffDuration, 8)))
	if err != nil {
		return f, r.fail("duration of a data record", edfOffDuration, 0, 0, err)
	}
	ns, err := edfInt(field(edfOffSignals, 4))
	if err != nil {
		return f, r.fail("number of signals", edfOffSignals, 0, 0, err)
	}
	if ns < 1 {
		return f, r.fail("number of signals", edfOffSignals, 0, 0, fmt.Errorf("%d, want at least 1", ns))
	}
	if ns > MaxEDFSignals {
		return f, r.fail("number of signals", edfOffSignals, 0, 0, fmt.Errorf("%d signals, this reader accepts at most %d", ns, MaxEDFSignals))
	}
	want := edfFixedBytes + ns*edfPerSignalBytes
	if hb != want {
		return f, r.fail("number of bytes in header record", edfOffHeaderBytes, 0, 0,
			fmt.Errorf("says %d, but 256 + %d signals x 256 = %d", hb, ns, want))
	}
	h.HeaderBytes = hb
	if len(data) < hb {
		return f, r.fail("signal header", int64(len(data)), 0, 0,
			fmt.Errorf("file has %d bytes, the header of %d signals needs %d: %w", len(data), ns, hb, ErrTruncated))
	}

	// Per-signal fields: field k of signal i sits at base_k + i*width_k.
	var bases [len(edfSignalFields)]int
	off := edfFixedBytes
	for k, fd := range edfSignalFields {
		bases[k] = off
		off += ns * fd.width
	}
	at := func(k, i int) (int, []byte) {
		o := bases[k] + i*edfSignalFields[k].width
		return o, data[o : o+edfSignalFields[k].width]
	}
	h.Signals = make([]EDFSignal, ns)
	recBytes := 0
	for i := range h.Signals {
		s := &h.Signals[i]
		_, b := at(0, i)
		s.Label = edfText(b)
		_, b = at(1, i)
		s.Transducer = edfText(b)
		_, b = at(2, i)
		s.Dimension = edfText(b)
		_, b = at(7, i)
		s.Prefilter = edfText(b)
		s.Annotation = s.Label == edfAnnotationLabel

		o, b := at(3, i)
		if s.PhysMin, err = parseDecimal(string(b)); err != nil {
			return f, r.fail("physical minimum", int64(o), i+1, 0, err)
		}
		o, b = at(4, i)
		if s.PhysMax, err = parseDecimal(string(b)); err != nil {
			return f, r.fail("physical maximum", int64(o), i+1, 0, err)
		}
		o, b = at(5, i)
		if s.DigMin, err = edfInt(b); err != nil {
			return f, r.fail("digital minimum", int64(o), i+1, 0, err)
		}
		if s.DigMin < math.MinInt16 || s.DigMin > math.MaxInt16 {
			return f, r.fail("digital minimum", int64(o), i+1, 0, fmt.Errorf("%d outside the 16-bit range", s.DigMin))
		}
		o, b = at(6, i)
		if s.DigMax, err = edfInt(b); err != nil {
			return f, r.fail("digital maximum", int64(o), i+1, 0, err)
		}
		if s.DigMax < math.MinInt16 || s.DigMax > math.MaxInt16 {
			return f, r.fail("digital maximum", int64(o), i+1, 0, fmt.Errorf("%d outside the 16-bit range", s.DigMax))
		}
		if s.DigMin >= s.DigMax {
			return f, r.fail("digital minimum", int64(bases[5]+i*8), i+1, 0,
				fmt.Errorf("%d is not below the digital maximum %d", s.DigMin, s.DigMax))
		}
		if s.PhysMin == s.PhysMax && !s.Annotation {
			return f, r.fail("physical minimum", int64(bases[3]+i*8), i+1, 0,
				fmt.Errorf("equals the physical maximum %g, so no gain can be derived", s.PhysMax))
		}
		o, b = at(8, i)
		if s.SamplesPerRecord, err = edfInt(b); err != nil {
			return f, r.fail("number of samples in each data record", int64(o), i+1, 0, err)
		}
		if s.SamplesPerRecord < 1 {
			return f, r.fail("number of samples in each data record", int64(o), i+1, 0,
				fmt.Errorf("%d, want at least 1", s.SamplesPerRecord))
		}
		if s.SamplesPerRecord > len(data) {
			return f, r.fail("number of samples in each data record", int64(o), i+1, 0,
				fmt.Errorf("%d samples per record cannot fit in a file of %d bytes: %w", s.SamplesPerRecord, len(data), ErrTruncated))
		}
		recBytes += 2 * s.SamplesPerRecord
	}

	if math.IsNaN(dur) || dur <= 0 {
		return f, r.fail("duration of a data record", edfOffDuration, 0, 0, fmt.Errorf("%g s, want a positive duration", dur))
	}
	h.RecordSeconds = dur

	// Every signal is listed; the ECG leads among them are read.
	var infos []SignalInfo
	for i, s := range h.Signals {
		if s.Annotation {
			continue
		}
		infos = append(infos, SignalInfo{Number: i + 1, Label: s.Label, Unit: s.Dimension,
			RateHz: float64(s.SamplesPerRecord) / dur, Kind: Classify(s.Label, s.Dimension)})
	}
	if len(infos) == 0 {
		return f, r.fail("label", int64(bases[0]), 0, 0, errors.New("the file holds annotation signals only"))
	}
	f.Signals = infos
	var keep []int // signal numbers (1-based) of the leads read
	chosenLead := 0
	if opt.Label != "" {
		var labels []string
		for _, in := range infos {
			labels = append(labels, strconv.Quote(in.Label))
			if len(keep) == 0 && strings.EqualFold(strings.TrimSpace(opt.Label), in.Label) {
				keep = []int{in.Number}
			}
		}
		if len(keep) == 0 {
			return f, r.fail("label", int64(bases[0]), 0, 0,
				fmt.Errorf("no signal labelled %q (labels: %s)", opt.Label, strings.Join(labels, ", ")))
		}
		if sig := h.Signals[keep[0]-1]; !isVolt(sig.Dimension) {
			return f, r.fail("physical dimension", int64(bases[2]+(keep[0]-1)*8), keep[0], 0,
				fmt.Errorf("%q is not a unit of voltage (nV, uV, µV, mV or V)", sig.Dimension))
		}
	} else {
		var warning, refusal string
		keep, chosenLead, warning, refusal = ChooseLead(infos)
		if refusal != "" {
			// An ECG label with a unit that is not a voltage is named by its
			// field: the likeliest mistake of a writer.
			for _, in := range infos {
				if Classify(in.Label, "mV") == KindECG && !isVolt(in.Unit) {
					return f, r.fail("physical dimension", int64(bases[2]+(in.Number-1)*8), in.Number, 0,
						fmt.Errorf("%q is not a unit of voltage (nV, uV, µV, mV or V), so signal %d cannot be the ECG; %s", in.Unit, in.Number, refusal))
				}
			}
			return f, r.fail("label", int64(bases[0]), 0, 0, errors.New(refusal))
		}
		if warning != "" {
			h.Warnings = append(h.Warnings, warning)
		}
	}
	h.Chosen = keep[chosenLead] - 1
	for _, num := range keep {
		sig := h.Signals[num-1]
		rate := float64(sig.SamplesPerRecord) / dur
		if rate < MinFileRateHz || rate > MaxFileRateHz {
			return f, r.fail("number of samples in each data record", int64(bases[8]+(num-1)*8), num, 0,
				fmt.Errorf("%d samples per %g s record is %g Hz, outside %d-%d Hz", sig.SamplesPerRecord, dur, rate, MinFileRateHz, MaxFileRateHz))
		}
	}

	// Data records.
	body := len(data) - hb
	whole := body / recBytes
	switch {
	case nrec == -1:
		nrec = whole
		if rest := body - whole*recBytes; rest != 0 {
			h.Warnings = append(h.Warnings, fmt.Sprintf("record count -1; %d trailing bytes after %d whole records ignored", rest, whole))
		}
	case nrec > whole:
		missing := whole + 1
		return f, r.fail("", int64(len(data)), 0, missing,
			fmt.Errorf("header promises %d data records of %d bytes, file holds %d whole ones: %w", nrec, recBytes, whole, ErrTruncated))
	case body > nrec*recBytes:
		h.Warnings = append(h.Warnings, fmt.Sprintf("%d bytes after the last of %d data records ignored", body-nrec*recBytes, nrec))
	}
	if nrec == 0 {
		return f, r.fail("number of data records", edfOffRecords, 0, 0, errors.New("the file holds no data records"))
	}
	h.Records = nrec

	// Offsets of the signals within a data record.
	offsets := make([]int, len(h.Signals))
	annSig := -1
	for i, s := range h.Signals {
		if i > 0 {
			offsets[i] = offsets[i-1] + 2*h.Signals[i-1].SamplesPerRecord
		}
		if s.Annotation && annSig < 0 {
			annSig = i
		}
	}
	for _, num := range keep {
		sig := h.Signals[num-1]
		scale, _ := mvPerUnit(sig.Dimension)
		gain := (sig.PhysMax - sig.PhysMin) / float64(sig.DigMax-sig.DigMin)
		phys := func(d int) float64 { return (sig.PhysMin + float64(d-sig.DigMin)*gain) * scale }
		spr := sig.SamplesPerRecord
		samples := make([]float64, nrec*spr)
		clipped := 0
		for rec := 0; rec < nrec; rec++ {
			p := hb + rec*recBytes + offsets[num-1]
			out := samples[rec*spr : (rec+1)*spr]
			for k := range out {
				d := int(int16(binary.LittleEndian.Uint16(data[p+2*k:])))
				// A value outside the declared digital range is clipped to
				// it, as common EDF readers do: the range is what the
				// recorder could measure.
				if d < sig.DigMin || d > sig.DigMax {
					d = min(max(d, sig.DigMin), sig.DigMax)
					clipped++
				}
				out[k] = phys(d)
			}
		}
		if clipped > 0 {
			what := "samples"
			if clipped == 1 {
				what = "sample"
			}
			h.Warnings = append(h.Warnings, fmt.Sprintf("signal %d %q: %d %s outside the declared digital range %d..%d clipped to it",
				num, sig.Label, clipped, what, sig.DigMin, sig.DigMax))
		}
		rate := float64(spr) / dur
		lo, hi := phys(sig.DigMin), phys(sig.DigMax)
		f.Leads = append(f.Leads, Lead{Signal: num, Limits: Limits{min(lo, hi), max(lo, hi)}, Waveform: Waveform{
			Samples: samples,
			RateHz:  rate,
			Label:   sig.Label,
			Source: fmt.Sprintf("%s signal %d of %d %q, %g Hz, %s, transducer %q, prefiltering %q",
				h.Variant, num, ns, sig.Label, rate, sig.Dimension, sig.Transducer, sig.Prefilter),
		}})
	}
	f.ChosenLead = chosenLead
	chosenRate := f.Leads[chosenLead].Waveform.RateHz

	// EDF+ time keeping: the first annotation of each record gives its onset.
	if plus {
		if annSig < 0 {
			if h.Variant == "EDF+D" {
				return f, r.fail("label", int64(bases[0]), 0, 0,
					errors.New("EDF+D file without an \"EDF Annotations\" signal has no record times"))
			}
			h.Warnings = append(h.Warnings, "EDF+ file without an \"EDF Annotations\" signal")
		} else {
			alen := 2 * h.Signals[annSig].SamplesPerRecord
			var first float64
			for rec := 0; rec < nrec; rec++ {
				p := hb + rec*recBytes + offsets[annSig]
				onset, err := talOnset(data[p : p+alen])
				if err != nil {
					if h.Variant == "EDF+D" {
						return f, r.fail("time-keeping annotation", int64(p), annSig+1, rec+1, err)
					}
					h.Warnings = append(h.Warnings, fmt.Sprintf("data record %d: time-keeping annotation: %v", rec+1, err))
					break
				}
				if rec == 0 {
					first = onset
					if !h.Start.IsZero() && onset > 0 && onset < 86400 {
						h.Start = h.Start.Add(time.Duration(math.Round(onset * float64(time.Second))))
					}
					continue
				}
				if h.Variant != "EDF+D" {
					break // EDF+C is contiguous by definition; only the start matters
				}
				expect := first + float64(rec)*dur
				if math.Abs(onset-expect) > 0.5/chosenRate {
					return f, r.fail("time-keeping annotation", int64(p), annSig+1, rec+1,
						fmt.Errorf("record starts at %g s, %g s after the previous one ends; discontinuous recordings: %w", onset, onset-expect, ErrUnsupported))
				}
			}
		}
	}

	for i := range f.Leads {
		f.Leads[i].Waveform.Start = h.Start
	}
	f.Waveform = f.Leads[chosenLead].Waveform
	return f, nil
}

// isVolt reports whether a physical dimension is a unit of voltage.
func isVolt(dim string) bool {
	_, ok := mvPerUnit(dim)
	return ok
}

// fieldErr positions an error found by a helper.
type fieldErr struct {
	field string
	off   int
	err   error
}

func (e *fieldErr) Error() string { return e.field + ": " + e.err.Error() }
