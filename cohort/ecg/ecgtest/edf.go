// Package ecgtest makes test input for package ecg and its callers: EDF files
// written from a waveform and synthetic RR-interval series of sinus rhythm and
// of atrial fibrillation. Only tests import it; the program never does.
package ecgtest

import (
	"cohortdesk/cohort/ecg"

	"bytes"
	"encoding/binary"
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"
	"time"
)

// EDFWriteOptions steer EncodeEDF. The zero value writes plain EDF in
// microvolts with 1 s data records.
type EDFWriteOptions struct {
	// Plus writes EDF+C: an "EDF Annotations" signal is added that holds only
	// the time-keeping annotation each data record must carry.
	Plus bool
	// Patient and Recording fill the identification fields. Empty gives the
	// EDF+ "unknown" forms ("X X X X" and "Startdate ... X X X"), so files made
	// for tests and demos carry no identification at all.
	Patient, Recording string
	// RecordSeconds is the duration of a data record; default 1. RateHz times
	// RecordSeconds must be a whole number of samples.
	RecordSeconds float64
	// Dimension is "uV" (default), "mV" or "V".
	Dimension string
	// Transducer and Prefilter fill the header fields of the same names.
	Transducer, Prefilter string
	// PhysMin and PhysMax fix the physical range (in Dimension units); when
	// both are zero it is the data's range rounded outwards. Samples outside a
	// fixed range are clipped.
	PhysMin, PhysMax float64
}

// EncodeEDF writes w as an EDF file (or EDF+C, see EDFWriteOptions.Plus) with
// digital range -32768..32767, so ReadEDF(EncodeEDF(w)) returns w to within
// half a quantisation step, (PhysMax-PhysMin)/65535/2. The last data record is
// padded with the last sample, so the file may hold up to one record more
// samples than w. A zero w.Start is written as 01.01.85 00.00.00 (and, in
// EDF+, "Startdate X", which ReadEDF turns back into the zero time); plain EDF
// keeps whole seconds only, EDF+ keeps the fraction in the first record's
// onset.
func EncodeEDF(w ecg.Waveform, o EDFWriteOptions) ([]byte, error) {
	dim := o.Dimension
	if dim == "" {
		dim = "uV"
	}
	perMV := 0.0
	switch dim {
	case "uV":
		perMV = 1000
	case "mV":
		perMV = 1
	case "V":
		perMV = 0.001
	default:
		return nil, fmt.Errorf("ecgtest: encode edf: dimension %q, want uV, mV or V", dim)
	}
	values := make([]float64, len(w.Samples))
	for i, v := range w.Samples {
		values[i] = v * perMV
	}
	label := w.Label
	if label == "" {
		label = "ECG"
	}
	return EncodeEDFChannels([]EDFChannel{{Label: label, Dimension: dim, Values: values, RateHz: w.RateHz,
		Transducer: o.Transducer, Prefilter: o.Prefilter, PhysMin: o.PhysMin, PhysMax: o.PhysMax}}, w.Start, o)
}

// EDFChannel is one signal for EncodeEDFChannels: values in its own unit
// (Dimension, written as given, any text), at its own rate.
type EDFChannel struct {
	Label, Dimension      string
	Transducer, Prefilter string
	Values                []float64
	RateHz                float64
	// PhysMin and PhysMax fix the physical range; when both are zero it is
	// the data's range rounded outwards. Values outside a fixed range are
	// clipped.
	PhysMin, PhysMax float64
}

// ECGChannel is a waveform (mV) as an EDF channel in the unit dim: a unit
// of microvolts (any text with a u, µ or "micro"), of volts ("V", "volt",
// "volts") or, otherwise, of millivolts. A micro sign is written as '?'
// (EDF headers are ASCII); PatchEDFDimension puts other bytes there.
func ECGChannel(w ecg.Waveform, label, dim string) EDFChannel {
	perMV := 1.0
	l := strings.ToLower(dim)
	switch {
	case strings.ContainsAny(l, "uµμ") || strings.Contains(l, "micro"):
		perMV = 1000
	case l == "v" || strings.HasPrefix(l, "volt"):
		perMV = 0.001
	}
	values := make([]float64, len(w.Samples))
	for i, v := range w.Samples {
		values[i] = v * perMV
	}
	return EDFChannel{Label: label, Dimension: dim, Values: values, RateHz: w.RateHz}
}

// EncodeEDFChannels writes several signals as one EDF (or EDF+C) file; the
// options' RecordSeconds, Plus and identification apply, and start is the
// recording's start. Every channel needs a whole number of samples per
// record; the shortest channel sets the number of records, and the last
// record of each is padded with its last value.
func EncodeEDFChannels(chs []EDFChannel, start time.Time, o EDFWriteOptions) ([]byte, error) {
	if len(chs) == 0 {
		return nil, errors.New("ecgtest: encode edf: no channels")
	}
	dur := o.RecordSeconds
	if dur == 0 {
		dur = 1
	}
	durS, err := fit8(dur, 0)
	if err != nil || !(dur > 0) {
		return nil, fmt.Errorf("ecgtest: encode edf: record duration %g s cannot be written in 8 characters", dur)
	}
	dur, _ = strconv.ParseFloat(durS, 64)
	type sigHdr struct{ label, trans, dim, pmin, pmax, dmin, dmax, pre, spr string }
	var sigs []sigHdr
	type enc struct {
		values     []float64
		spr        int
		pmin, pmax float64
	}
	var encs []enc
	nrec := 0
	for ci, c := range chs {
		if len(c.Values) == 0 {
			return nil, fmt.Errorf("ecgtest: encode edf: channel %d has no samples", ci+1)
		}
		if !(c.RateHz > 0) || math.IsInf(c.RateHz, 0) {
			return nil, fmt.Errorf("ecgtest: encode edf: channel %d: sampling rate %g Hz", ci+1, c.RateHz)
		}
		sprF := c.RateHz * dur
		spr := int(math.Round(sprF))
		if spr < 1 || math.Abs(sprF-float64(spr)) > 1e-9*sprF {
			return nil, fmt.Errorf("ecgtest: encode edf: %g Hz x %g s is not a whole number of samples per record", c.RateHz, dur)
		}
		pmin, pmax := c.PhysMin, c.PhysMax
		var pminS, pmaxS string
		if pmin == 0 && pmax == 0 {
			lo, hi := math.Inf(1), math.Inf(-1)
			for _, v := range c.Values {
				if math.IsNaN(v) || math.IsInf(v, 0) {
					return nil, errors.New("ecgtest: encode edf: samples must be finite")
				}
				lo, hi = min(lo, v), max(hi, v)
			}
			if lo == hi {
				lo, hi = lo-1, hi+1
			}
			if pminS, err = fit8(lo, -1); err == nil {
				pmaxS, err = fit8(hi, +1)
			}
		} else {
			if pminS, err = fit8(pmin, 0); err == nil {
				pmaxS, err = fit8(pmax, 0)
			}
		}
		if err != nil {
			return nil, fmt.Errorf("ecgtest: encode edf: physical range: %w", err)
		}
		// Quantise with the values the reader will parse, not the ones we meant.
		pmin, _ = strconv.ParseFloat(pminS, 64)
		pmax, _ = strconv.ParseFloat(pmaxS, 64)
		if pmin == pmax {
			return nil, errors.New("ecgtest: encode edf: physical minimum equals maximum")
		}
		n := (len(c.Values) + spr - 1) / spr
		if ci == 0 || n < nrec {
			nrec = n
		}
		label := c.Label
		sigs = append(sigs, sigHdr{label, c.Transducer, c.Dimension, pminS, pmaxS, "-32768", "32767", c.Prefilter, strconv.Itoa(spr)})
		encs = append(encs, enc{c.Values, spr, pmin, pmax})
	}
	ns := len(chs)
	if o.Plus {
		ns++
	}

	// Time keeping for EDF+: "+onset" 20 20 0, padded with zero bytes.
	frac := 0.0
	if !start.IsZero() {
		frac = float64(start.Nanosecond()) / 1e9
	}
	tal := func(rec int) string {
		on := frac + float64(rec)*dur
		s := strconv.FormatFloat(on, 'f', 9, 64)
		s = strings.TrimRight(strings.TrimRight(s, "0"), ".")
		return "+" + s + "\x14\x14\x00"
	}
	annSpr := (len(tal(nrec-1)) + 1) / 2
	annSpr = max(annSpr+4, 16)

	var hdr bytes.Buffer
	put := func(s string, width int) {
		b := []byte(asciiOnly(s))
		if len(b) > width {
			b = b[:width]
		}
		hdr.Write(b)
		for i := len(b); i < width; i++ {
			hdr.WriteByte(' ')
		}
	}
	patient, recording := o.Patient, o.Recording
	if patient == "" {
		patient = "X X X X"
	}
	dateS, timeS := "01.01.85", "00.00.00"
	startdate := "X"
	if !start.IsZero() {
		t := start
		if t.Year() < 1985 || t.Year() > 2084 {
			return nil, fmt.Errorf("ecgtest: encode edf: start year %d outside 1985-2084", t.Year())
		}
		dateS = fmt.Sprintf("%02d.%02d.%02d", t.Day(), int(t.Month()), t.Year()%100)
		timeS = fmt.Sprintf("%02d.%02d.%02d", t.Hour(), t.Minute(), t.Second())
		startdate = fmt.Sprintf("%02d-%s-%04d", t.Day(), strings.ToUpper(t.Month().String()[:3]), t.Year())
	}
	if recording == "" {
		recording = "Startdate " + startdate + " X X X"
	}
	reserved := ""
	if o.Plus {
		reserved = "EDF+C"
	}
	put("0", 8)
	put(patient, 80)
	put(recording, 80)
	put(dateS, 8)
	put(timeS, 8)
	put(strconv.Itoa(256+ns*256), 8) // a fixed header of 256 bytes, then 256 per signal (EDF specification)
	put(reserved, 44)
	put(strconv.Itoa(nrec), 8)
	put(durS, 8)
	put(strconv.Itoa(ns), 4)
	if o.Plus {
		sigs = append(sigs, sigHdr{"EDF Annotations", "", "", "-1", "1", "-32768", "32767", "", strconv.Itoa(annSpr)})
	}
	for _, get := range []func(sigHdr) (string, int){
		func(s sigHdr) (string, int) { return s.label, 16 },
		func(s sigHdr) (string, int) { return s.trans, 80 },
		func(s sigHdr) (string, int) { return s.dim, 8 },
		func(s sigHdr) (string, int) { return s.pmin, 8 },
		func(s sigHdr) (string, int) { return s.pmax, 8 },
		func(s sigHdr) (string, int) { return s.dmin, 8 },
		func(s sigHdr) (string, int) { return s.dmax, 8 },
		func(s sigHdr) (string, int) { return s.pre, 80 },
		func(s sigHdr) (string, int) { return s.spr, 8 },
		func(s sigHdr) (string, int) { return "", 32 },
	} {
		for _, s := range sigs {
			put(get(s))
		}
	}

	var out []byte
	out = append(out, hdr.Bytes()...)
	for rec := 0; rec < nrec; rec++ {
		for _, e := range encs {
			gain := 65535 / (e.pmax - e.pmin)
			for k := 0; k < e.spr; k++ {
				i := min(rec*e.spr+k, len(e.values)-1)
				d := math.Round((e.values[i]-e.pmin)*gain) - 32768
				d = math.Max(-32768, math.Min(32767, d))
				out = binary.LittleEndian.AppendUint16(out, uint16(int16(d)))
			}
		}
		if o.Plus {
			a := make([]byte, 2*annSpr)
			copy(a, tal(rec))
			out = append(out, a...)
		}
	}
	return out, nil
}

// fit8 formats x in at most 8 characters with as many decimals as fit,
// rounding down (dir < 0), up (dir > 0) or to nearest (dir == 0), so a data
// range can be widened rather than cut.
func fit8(x float64, dir int) (string, error) {
	for prec := 6; prec >= 0; prec-- {
		p := math.Pow(10, float64(prec))
		v := x * p
		switch {
		case dir < 0:
			v = math.Floor(v)
		case dir > 0:
			v = math.Ceil(v)
		default:
			v = math.Round(v)
		}
		s := strconv.FormatFloat(v/p, 'f', prec, 64)
		if strings.Contains(s, ".") {
			s = strings.TrimRight(strings.TrimRight(s, "0"), ".")
		}
		if s == "-0" {
			s = "0"
		}
		if len(s) <= 8 {
			return s, nil
		}
	}
	return "", fmt.Errorf("%g does not fit in 8 characters", x)
}

// asciiOnly replaces what EDF headers may not hold (anything outside printable
// ASCII) with '?'.
func asciiOnly(s string) string {
	return strings.Map(func(r rune) rune {
		if r < 32 || r > 126 {
			return '?'
		}
		return r
	}, s)
}

// PatchEDFDimension writes raw bytes into the physical dimension field of
// signal i (0-based) of an EDF file, padded with spaces: the Latin-1 micro
// sign, or UTF-8 text, which real files hold although EDF asks for ASCII.
func PatchEDFDimension(b []byte, i int, raw []byte) {
	ns, _ := strconv.Atoi(strings.TrimSpace(string(b[252:256])))
	off := 256 + ns*(16+80) + i*8 // after the labels and transducer fields (EDF specification)
	for k := range 8 {
		c := byte(' ')
		if k < len(raw) {
			c = raw[k]
		}
		b[off+k] = c
	}
}
