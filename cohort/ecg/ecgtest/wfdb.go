package ecgtest

import (
	"encoding/binary"
	"fmt"
	"math"
	"strings"

	"cohortdesk/cohort/ecg"
)

// WFDBChannel is one signal of a record written by EncodeWFDB: values in
// its unit, written as ADC units with the gain and baseline given.
type WFDBChannel struct {
	Description string
	Units       string  // "" leaves the WFDB default (mV)
	Gain        float64 // ADC units per unit; 200 when 0
	Baseline    int
	ADCRes      int // bits; 12 for format 212, 16 for format 16 when 0
	Values      []float64
	// Invalid marks samples to write as the format's invalid value.
	Invalid []bool
}

// WFDBRecordFiles are the files of a record: header, signal file and,
// when beats are given, a reference annotation file.
type WFDBRecordFiles struct {
	Header, Signal, Annotations []byte
	// Samples are the ADC values written, signal by signal.
	Samples [][]int
}

// EncodeWFDB writes a record named name at rateHz with every channel in one
// signal file name.dat in format 16 or 212, interleaved one sample of each
// per frame (WFDB specification, signal files), and its header name.hea
// (header files). The checksum field is the sum of the samples modulo 2^16
// as a signed number. Written from the specification's definitions,
// independently of ecg.ReadWFDB.
func EncodeWFDB(name string, rateHz float64, format int, chs []WFDBChannel) (WFDBRecordFiles, error) {
	var f WFDBRecordFiles
	if format != 16 && format != 212 {
		return f, fmt.Errorf("ecgtest: wfdb: format %d", format)
	}
	n := len(chs[0].Values)
	for _, c := range chs {
		if len(c.Values) != n {
			return f, fmt.Errorf("ecgtest: wfdb: channels of different lengths")
		}
	}
	var hdr strings.Builder
	fmt.Fprintf(&hdr, "# written by a test\n%s %d %g %d\n", name, len(chs), rateHz, n)
	lim := 1 << 15
	invalid := math.MinInt16
	if format == 212 {
		lim, invalid = 1<<11, -2048
	}
	for _, c := range chs {
		gain := c.Gain
		if gain == 0 {
			gain = 200
		}
		res := c.ADCRes
		if res == 0 {
			res = 12
			if format == 16 {
				res = 16
			}
		}
		var d []int
		sum := 0
		for i, v := range c.Values {
			a := int(math.Round(v*gain)) + c.Baseline
			a = max(-lim+1, min(lim-1, a))
			if i < len(c.Invalid) && c.Invalid[i] {
				a = invalid
			}
			d = append(d, a)
			sum += a
		}
		f.Samples = append(f.Samples, d)
		units := ""
		if c.Units != "" {
			units = "/" + c.Units
		}
		fmt.Fprintf(&hdr, "%s.dat %d %g(%d)%s %d 0 %d %d 0 %s\n", name, format, gain, c.Baseline, units, res, d[0], int16(sum), c.Description)
	}
	f.Header = []byte(hdr.String())
	// Interleave: frame k holds sample k of every signal.
	var stream []int
	for k := 0; k < n; k++ {
		for _, d := range f.Samples {
			stream = append(stream, d[k])
		}
	}
	switch format {
	case 16:
		for _, v := range stream {
			f.Signal = binary.LittleEndian.AppendUint16(f.Signal, uint16(int16(v)))
		}
	case 212:
		f.Signal = Pack212(stream)
	}
	return f, nil
}

// Pack212 packs 12-bit samples two to three bytes (WFDB specification,
// format 212): byte 0 holds the low 8 bits of the first sample; byte 1 its
// high 4 bits in the low nibble and the second sample's high 4 bits in the
// high nibble; byte 2 the low 8 bits of the second. An odd last sample
// takes two bytes.
func Pack212(samples []int) []byte {
	var out []byte
	for i := 0; i < len(samples); i += 2 {
		a := uint16(samples[i]) & 0x0FFF
		if i+1 == len(samples) {
			out = append(out, byte(a), byte(a>>8))
			break
		}
		b := uint16(samples[i+1]) & 0x0FFF
		out = append(out, byte(a), byte(a>>8)|byte(b>>8)<<4, byte(b))
	}
	return out
}

// BeatAnnotation is one annotation for EncodeAnnotations.
type BeatAnnotation struct {
	Sample int64
	Code   int // 1 normal beat, 5 premature ventricular beat, 28 rhythm change, ...
	Aux    string
}

// EncodeAnnotations writes annotations in the MIT format (WFDB
// specification, annotation files): per annotation a 16-bit little-endian
// word, the code in the upper 6 bits and the time since the previous
// annotation in the lower 10; a longer interval goes first in a SKIP (code
// 59, then the interval as a 32-bit two's complement number, high 16-bit
// word first, each word little-endian); auxiliary text follows its
// annotation as an AUX word (code 63, length in the lower 10 bits) and the
// text, padded to an even length; two zero bytes end the file.
func EncodeAnnotations(anns []BeatAnnotation) []byte {
	var out []byte
	word := func(code, v int) { out = binary.LittleEndian.AppendUint16(out, uint16(code<<10|v&0x3FF)) }
	var prev int64
	for _, a := range anns {
		dt := a.Sample - prev
		if dt > 1023 || dt < 0 {
			word(59, 0)
			u := uint32(int32(dt))
			out = binary.LittleEndian.AppendUint16(out, uint16(u>>16))
			out = binary.LittleEndian.AppendUint16(out, uint16(u))
			dt = 0
		}
		word(a.Code, int(dt))
		prev = a.Sample
		if a.Aux != "" {
			word(63, len(a.Aux))
			out = append(out, a.Aux...)
			if len(a.Aux)%2 == 1 {
				out = append(out, 0)
			}
		}
	}
	return append(out, 0, 0)
}

// ECGWFDB writes a synthetic recording as a WFDB record of one ECG signal
// ("MLII", gain 200 ADC units per mV, the databases' usual figures) with
// its true beats as reference annotations: normal beats, or premature
// ventricular beats at the indices in premature.
func ECGWFDB(name string, syn ecg.Synthetic, format int, premature []int) (WFDBRecordFiles, error) {
	f, err := EncodeWFDB(name, syn.Waveform.RateHz, format, []WFDBChannel{{Description: "MLII", Values: syn.Waveform.Samples}})
	if err != nil {
		return f, err
	}
	pvc := map[int]bool{}
	for _, k := range premature {
		pvc[k] = true
	}
	var anns []BeatAnnotation
	for k, t := range syn.RTimes {
		code := 1
		if pvc[k] {
			code = 5
		}
		anns = append(anns, BeatAnnotation{Sample: int64(math.Round(t * syn.Waveform.RateHz)), Code: code})
	}
	f.Annotations = EncodeAnnotations(anns)
	return f, nil
}
