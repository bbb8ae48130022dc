package ecg

import (
	"encoding/binary"
	"errors"
	"fmt"
	"math"
	"path"
	"strconv"
	"strings"
	"time"
)

// The WFDB format is the open format of the physiological signal databases
// used to test ECG analysis (Moody GB, Mark RG. The impact of the MIT-BIH
// arrhythmia database. IEEE Eng Med Biol 2001;20(3):45-50; the format is
// defined in the WFDB specification, "header files", "signal files" and
// "annotation files"; we read it from memory and check the byte layouts in
// tests against the specification's definitions). A record is a text header
// (RECORD.hea) naming one or more signal files; annotation files (for
// example RECORD.atr, a reference annotator's beats) sit beside it.

// File is one file of an upload: its base name and content.
type File struct {
	Name string
	Data []byte
}

// WFDBSignal is one signal line of a WFDB header.
type WFDBSignal struct {
	FileName    string
	Format      int
	ByteOffset  int
	Gain        float64 // ADC units per physical unit
	Baseline    int     // the ADC value of 0 physical units
	Units       string
	ADCRes      int // bits
	ADCZero     int
	Checksum    int
	HasChecksum bool
	Description string
}

// WFDBHeader is a parsed WFDB header file.
type WFDBHeader struct {
	Record  string
	RateHz  float64
	Samples int // per signal; 0 when the header does not say
	Start   time.Time
	Signals []WFDBSignal
}

// WFDBRecord is the result of ReadWFDB.
type WFDBRecord struct {
	Header   WFDBHeader
	Contents Contents
}

// Limits of the reader (ours, like the EDF reader's).
const (
	maxWFDBSignals   = 64
	wfdbDefaultGain  = 200 // ADC units per mV when the header gives none or 0 (WFDB specification)
	wfdbDefaultRate  = 250 // samples per second when the header gives none (WFDB specification)
	wfdbInvalid16    = math.MinInt16
	wfdbInvalid212   = -2048
	wfdbMaxHeaderLen = 1 << 20
)

// wfdbFail positions an error in a header line.
func wfdbFail(file string, line int, field string, format string, args ...any) error {
	return &InputError{Format: "wfdb " + file, Line: line, Field: field, Err: fmt.Errorf(format, args...)}
}

// ParseWFDBHeader reads a WFDB header file. Multi-segment records and
// signals with several samples per frame are refused as not supported.
func ParseWFDBHeader(name string, data []byte, loc *time.Location) (WFDBHeader, error) {
	var h WFDBHeader
	if len(data) > wfdbMaxHeaderLen {
		return h, wfdbFail(name, 0, "", "a header of %d bytes is not a WFDB header", len(data))
	}
	lines := strings.Split(strings.ReplaceAll(string(data), "\r\n", "\n"), "\n")
	ln := 0
	next := func() (string, int, bool) {
		for ln < len(lines) {
			l := strings.TrimSpace(lines[ln])
			ln++
			if l != "" && l[0] != '#' {
				return l, ln, true
			}
		}
		return "", ln, false
	}
	rec, at, ok := next()
	if !ok {
		return h, wfdbFail(name, max(1, at), "record line", "no record line: %w", ErrFormat)
	}
	f := strings.Fields(rec)
	if len(f) < 2 {
		return h, wfdbFail(name, at, "record line", "%q, want a record name and the number of signals", rec)
	}
	if strings.Contains(f[0], "/") {
		return h, wfdbFail(name, at, "record name", "%q is a multi-segment record: %w", f[0], ErrUnsupported)
	}
	h.Record = f[0]
	nsig, err := strconv.Atoi(f[1])
	if err != nil || nsig < 0 {
		return h, wfdbFail(name, at, "number of signals", "%q is not a count", f[1])
	}
	if nsig == 0 {
		return h, wfdbFail(name, at, "number of signals", "the record has no signals")
	}
	if nsig > maxWFDBSignals {
		return h, wfdbFail(name, at, "number of signals", "%d signals, this reader accepts at most %d", nsig, maxWFDBSignals)
	}
	h.RateHz = wfdbDefaultRate
	if len(f) > 2 {
		fs := f[2]
		if i := strings.IndexAny(fs, "/("); i >= 0 {
			fs = fs[:i] // counter frequency and base counter value are not needed
		}
		v, err := strconv.ParseFloat(fs, 64)
		if err != nil || !(v > 0) || math.IsInf(v, 0) {
			return h, wfdbFail(name, at, "sampling frequency", "%q is not a positive number", f[2])
		}
		h.RateHz = v
	}
	if len(f) > 3 {
		n, err := strconv.Atoi(f[3])
		if err != nil || n < 0 {
			return h, wfdbFail(name, at, "number of samples per signal", "%q is not a count", f[3])
		}
		h.Samples = n
	}
	if len(f) > 5 {
		t, err := wfdbTime(f[4], f[5], loc)
		if err != nil {
			return h, wfdbFail(name, at, "base time and date", "%q %q: %v", f[4], f[5], err)
		}
		h.Start = t
	}
	for i := 0; i < nsig; i++ {
		l, at, ok := next()
		if !ok {
			return h, wfdbFail(name, at, "signal line", "the record line announces %d signals, the header has %d: %w", nsig, i, ErrTruncated)
		}
		s, err := wfdbSignalLine(name, at, l)
		if err != nil {
			return h, err
		}
		h.Signals = append(h.Signals, s)
	}
	return h, nil
}

// wfdbSignalLine reads "file format[xN][:skew][+offset] [gain[(baseline)][/units]
// [adcres [adczero [initval [checksum [blocksize [description]]]]]]]".
func wfdbSignalLine(name string, at int, l string) (WFDBSignal, error) {
	var s WFDBSignal
	f := strings.Fields(l)
	if len(f) < 2 {
		return s, wfdbFail(name, at, "signal line", "%q, want a file name and a format", l)
	}
	s.FileName = f[0]
	fm := f[1]
	if i := strings.IndexByte(fm, '+'); i >= 0 {
		off, err := strconv.Atoi(fm[i+1:])
		if err != nil || off < 0 {
			return s, wfdbFail(name, at, "byte offset", "%q is not a byte offset", fm[i+1:])
		}
		s.ByteOffset = off
		fm = fm[:i]
	}
	if i := strings.IndexByte(fm, ':'); i >= 0 {
		fm = fm[:i] // skew: a fraction of a frame, not needed for beats
	}
	if i := strings.IndexByte(fm, 'x'); i >= 0 {
		if spf, err := strconv.Atoi(fm[i+1:]); err != nil || spf != 1 {
			return s, wfdbFail(name, at, "format", "%q: several samples per frame: %w", f[1], ErrUnsupported)
		}
		fm = fm[:i]
	}
	format, err := strconv.Atoi(fm)
	if err != nil {
		return s, wfdbFail(name, at, "format", "%q is not a signal format", f[1])
	}
	s.Format = format
	s.Gain, s.Units = wfdbDefaultGain, "mV"
	baselineSet := false
	if len(f) > 2 {
		g := f[2]
		if i := strings.IndexByte(g, '/'); i >= 0 {
			s.Units, g = g[i+1:], g[:i]
		}
		if i := strings.IndexByte(g, '('); i >= 0 {
			if !strings.HasSuffix(g, ")") {
				return s, wfdbFail(name, at, "baseline", "%q, want gain(baseline)", f[2])
			}
			b, err := strconv.Atoi(g[i+1 : len(g)-1])
			if err != nil {
				return s, wfdbFail(name, at, "baseline", "%q is not an integer", g[i+1:len(g)-1])
			}
			s.Baseline, baselineSet = b, true
			g = g[:i]
		}
		v, err := strconv.ParseFloat(g, 64)
		if err != nil || v < 0 || math.IsInf(v, 0) {
			return s, wfdbFail(name, at, "ADC gain", "%q is not a gain", g)
		}
		if v > 0 {
			s.Gain = v // 0 means uncalibrated: the default gain applies
		}
	}
	ints := []*int{&s.ADCRes, &s.ADCZero, nil, &s.Checksum, nil}
	names := []string{"ADC resolution", "ADC zero", "initial value", "checksum", "block size"}
	k := 3
	for j := range ints {
		if len(f) <= k {
			break
		}
		v, err := strconv.Atoi(f[k])
		if err != nil {
			return s, wfdbFail(name, at, names[j], "%q is not an integer", f[k])
		}
		if ints[j] != nil {
			*ints[j] = v
		}
		if j == 3 {
			s.HasChecksum = true
		}
		k++
	}
	if len(f) > k {
		s.Description = strings.Join(f[k:], " ")
	}
	if s.ADCRes == 0 {
		switch s.Format {
		case 212:
			s.ADCRes = 12
		default:
			s.ADCRes = 16
		}
	}
	if !baselineSet {
		s.Baseline = s.ADCZero
	}
	return s, nil
}

// wfdbTime reads "hh:mm:ss[.fff]" and "dd/mm/yyyy" as a clock time in loc.
func wfdbTime(clock, date string, loc *time.Location) (time.Time, error) {
	if loc == nil {
		loc = time.UTC
	}
	d, err := time.ParseInLocation("02/01/2006", date, loc)
	if err != nil {
		return time.Time{}, errors.New("want hh:mm:ss and dd/mm/yyyy")
	}
	parts := strings.Split(clock, ":")
	var hms [3]float64
	if len(parts) > 3 {
		return time.Time{}, errors.New("want hh:mm:ss")
	}
	for i, p := range parts {
		v, err := strconv.ParseFloat(p, 64)
		if err != nil || v < 0 {
			return time.Time{}, errors.New("want hh:mm:ss")
		}
		hms[3-len(parts)+i] = v
	}
	sec := hms[0]*3600 + hms[1]*60 + hms[2]
	return d.Add(time.Duration(math.Round(sec * 1e9))), nil
}

// ReadWFDB reads a WFDB record from its header and signal files: every
// signal is listed, and the ECG leads among them (Classify; WFDB's default
// unit is mV) are read in signal formats 16 and 212. Samples the file marks
// invalid come back as NaN. A header whose signal file is missing, or a
// file shorter than the header says, is refused.
func ReadWFDB(header File, files []File, loc *time.Location) (WFDBRecord, error) {
	h, err := ParseWFDBHeader(header.Name, header.Data, loc)
	if err != nil {
		return WFDBRecord{}, err
	}
	rec := WFDBRecord{Header: h}
	c := &rec.Contents
	c.Start = h.Start
	for i, s := range h.Signals {
		label := s.Description
		if label == "" {
			label = fmt.Sprintf("signal %d", i+1)
		}
		c.Signals = append(c.Signals, SignalInfo{Number: i + 1, Label: label, Unit: s.Units, RateHz: h.RateHz, Kind: Classify(label, s.Units)})
	}
	keep, chosen, warning, refusal := ChooseLead(c.Signals)
	if refusal != "" {
		return rec, wfdbFail(header.Name, 0, "", "%s", refusal)
	}
	if warning != "" {
		c.Warnings = append(c.Warnings, warning)
	}
	c.Chosen = chosen
	byName := map[string][]byte{}
	for _, f := range files {
		byName[path.Base(f.Name)] = f.Data
	}
	for _, num := range keep {
		lead, warn, err := wfdbLead(header.Name, h, num-1, byName)
		if err != nil {
			return rec, err
		}
		c.Warnings = append(c.Warnings, warn...)
		c.Leads = append(c.Leads, lead)
	}
	return rec, nil
}

// wfdbLead decodes signal i of h from its file.
func wfdbLead(hname string, h WFDBHeader, i int, files map[string][]byte) (Lead, []string, error) {
	s := h.Signals[i]
	var warn []string
	data, ok := files[s.FileName]
	if !ok {
		return Lead{}, nil, wfdbFail(hname, 0, "signal file", "signal %d is in %q, which was not uploaded with the header", i+1, s.FileName)
	}
	if s.Format != 16 && s.Format != 212 {
		return Lead{}, nil, wfdbFail(hname, 0, "format", "signal %d is stored in format %d; this reader reads formats 16 and 212: %w", i+1, s.Format, ErrUnsupported)
	}
	// The signals of one file are interleaved, one sample of each per frame,
	// in header order; all of them must share the format.
	var group []int
	for j, t := range h.Signals {
		if t.FileName == s.FileName {
			if t.Format != s.Format || t.ByteOffset != s.ByteOffset {
				return Lead{}, nil, wfdbFail(hname, 0, "format", "signals of %q differ in format or byte offset: %w", s.FileName, ErrUnsupported)
			}
			group = append(group, j)
		}
	}
	pos := 0
	for k, j := range group {
		if j == i {
			pos = k
		}
	}
	nsig := len(group)
	if s.ByteOffset > len(data) {
		return Lead{}, nil, wfdbFail(s.FileName, 0, "byte offset", "%d is past the end of the %d-byte file: %w", s.ByteOffset, len(data), ErrTruncated)
	}
	body := data[s.ByteOffset:]
	var total int // samples in the file, all signals
	switch s.Format {
	case 16:
		total = len(body) / 2
	case 212:
		total = len(body) / 3 * 2
		if len(body)%3 == 2 {
			total++ // a last, unpaired sample takes two bytes
		}
	}
	frames := total / nsig
	if h.Samples > 0 {
		if h.Samples > frames {
			return Lead{}, nil, wfdbFail(s.FileName, 0, "", "the header announces %d samples per signal, the file holds %d: %w", h.Samples, frames, ErrTruncated)
		}
		frames = h.Samples
	}
	if frames == 0 {
		return Lead{}, nil, wfdbFail(s.FileName, 0, "", "the file holds no samples")
	}
	mv, ok := mvPerUnit(s.Units)
	if !ok {
		return Lead{}, nil, wfdbFail(hname, 0, "units", "signal %d is in %q, not a unit of voltage", i+1, s.Units)
	}
	out := make([]float64, frames)
	invalid := 0
	sum := 0
	for k := range out {
		j := k*nsig + pos // index in the file's sample stream
		var d int
		switch s.Format {
		case 16:
			d = int(int16(binary.LittleEndian.Uint16(body[2*j:])))
			if d == wfdbInvalid16 {
				invalid++
			}
		case 212:
			d = unpack212(body, j)
			if d == wfdbInvalid212 {
				invalid++
			}
		}
		sum += d
		if (s.Format == 16 && d == wfdbInvalid16) || (s.Format == 212 && d == wfdbInvalid212) {
			out[k] = math.NaN()
			continue
		}
		out[k] = float64(d-s.Baseline) / s.Gain * mv
	}
	if s.HasChecksum && h.Samples > 0 && int16(sum) != int16(s.Checksum) {
		warn = append(warn, fmt.Sprintf("signal %d: the checksum of the samples is %d, the header says %d; the file may be damaged", i+1, int16(sum), s.Checksum))
	}
	// The converter's range: adcres bits around adczero; the format's
	// invalid value is not a sample.
	half := 1 << (min(max(s.ADCRes, 1), 16) - 1)
	dlo, dhi := s.ADCZero-half, s.ADCZero+half-1
	if (s.Format == 16 && dlo <= wfdbInvalid16) || (s.Format == 212 && dlo <= wfdbInvalid212) {
		dlo++
	}
	lo := float64(dlo-s.Baseline) / s.Gain * mv
	hi := float64(dhi-s.Baseline) / s.Gain * mv
	label := h.Signals[i].Description
	return Lead{Signal: i + 1, Limits: Limits{min(lo, hi), max(lo, hi)}, Waveform: Waveform{
		Samples: out,
		RateHz:  h.RateHz,
		Start:   h.Start,
		Label:   label,
		Source: fmt.Sprintf("WFDB record %q signal %d of %d %q, format %d, %g Hz, %g adu/%s, %d-bit",
			h.Record, i+1, len(h.Signals), label, s.Format, h.RateHz, s.Gain, s.Units, s.ADCRes),
	}}, warn, nil
}

// unpack212 returns sample j of a format 212 stream: each pair of samples
// fills three bytes; the first sample is the low 12 bits of the first two
// bytes read as a little-endian word, the second is the high four bits of
// the middle byte above the eight bits of the third; both are 12-bit two's
// complement (WFDB specification, signal files, format 212).
func unpack212(b []byte, j int) int {
	p := 3 * (j / 2)
	var v int
	if j%2 == 0 {
		v = int(b[p]) | int(b[p+1]&0x0F)<<8
	} else {
		v = int(b[p+2]) | int(b[p+1]&0xF0)<<4
	}
	if v >= 0x800 {
		v -= 0x1000
	}
	return v
}
