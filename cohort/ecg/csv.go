package ecg

import (
	"bytes"
	"fmt"
	"math"
	"strconv"
	"strings"
	"time"
	"unicode/utf8"
)

// CSVOptions supply what a CSV file may leave out. A value given both here and
// in the file must agree.
type CSVOptions struct {
	RateHz float64 // sampling rate, Hz
	Unit   string  // "mV" or "uV"; default mV
	Label  string  // lead name; default "ECG"
}

// ReadCSV reads our plain-text waveform format, version 1:
//
//	# sampling_rate_hz=500
//	# unit=uV
//	# label=ECG lead I
//	# start=2025-03-01T09:30:00Z
//	time_s,uV
//	0.000,12
//	0.002,15
//
// The rules:
//   - UTF-8 (a byte-order mark is skipped), lines end in LF or CRLF; blank
//     lines are ignored.
//   - A line starting with '#' is a comment. A comment "# key=value" sets
//     metadata and must come before the first data row; the keys are
//     sampling_rate_hz, unit (mV or uV), label and start (RFC 3339). Any other
//     key, or metadata among the data, is an error, so a misspelt or misplaced
//     rate is not silently ignored.
//   - An optional column-header row comes first: "mV", "uV", "time_s,mV" or
//     "time_s,uV" (case-insensitive); it can give the unit.
//   - Each data row holds one sample, or a time in seconds and a sample,
//     separated by a comma; every row has the same number of fields. Fields may
//     be surrounded by spaces or double quotes.
//   - The sampling rate comes from CSVOptions, the metadata, or, failing both,
//     the time column. With a time column, every time must lie within half a
//     sample of first + i/rate, since the Waveform has evenly spaced samples.
//
// Errors are *InputError values with the 1-based line number.
func ReadCSV(data []byte, opt CSVOptions) (Waveform, error) {
	fail := func(line int, field string, format string, args ...any) error {
		return &InputError{Format: "csv", Line: line, Field: field, Err: fmt.Errorf(format, args...)}
	}
	data = bytes.TrimPrefix(data, []byte("\xef\xbb\xbf"))
	if !utf8.Valid(data) {
		line := 1 + bytes.Count(data[:firstInvalidUTF8(data)], []byte("\n"))
		return Waveform{}, fail(line, "", "not valid UTF-8")
	}

	var (
		rate, rateLine = 0.0, 0
		unit, unitLine = "", 0
		label          string
		start          time.Time
		headerSeen     bool
		dataSeen       bool
		cols           int
		timeCol        bool
		samples, times []float64
		timeLines      []int
		firstDataLine  int
		lineNo         int
	)
	setUnit := func(u string, line int) error {
		var norm string
		switch strings.ToLower(u) {
		case "mv":
			norm = "mV"
		case "uv", "µv":
			norm = "uV"
		default:
			return fail(line, "unit", "%q, want mV or uV", u)
		}
		if unit != "" && unit != norm {
			return fail(line, "unit", "%s contradicts %s on line %d", norm, unit, unitLine)
		}
		unit, unitLine = norm, line
		return nil
	}

	for len(data) > 0 {
		lineNo++
		var raw []byte
		if i := bytes.IndexByte(data, '\n'); i >= 0 {
			raw, data = data[:i], data[i+1:]
		} else {
			raw, data = data, nil
		}
		line := strings.TrimSpace(string(bytes.TrimSuffix(raw, []byte("\r"))))
		if line == "" {
			continue
		}
		if line[0] == '#' {
			body := strings.TrimSpace(line[1:])
			eq := strings.IndexByte(body, '=')
			if eq <= 0 || !isKey(strings.TrimSpace(body[:eq])) {
				continue // a plain comment
			}
			key, val := strings.TrimSpace(body[:eq]), strings.TrimSpace(body[eq+1:])
			if dataSeen {
				return Waveform{}, fail(lineNo, key, "metadata must come before the first data row (line %d)", firstDataLine)
			}
			switch key {
			case "sampling_rate_hz":
				v, err := strconv.ParseFloat(val, 64)
				if err != nil || !(v > 0) || math.IsInf(v, 0) {
					return Waveform{}, fail(lineNo, key, "%q is not a positive number", val)
				}
				rate, rateLine = v, lineNo
			case "unit":
				if err := setUnit(val, lineNo); err != nil {
					return Waveform{}, err
				}
			case "label":
				label = val
			case "start":
				t, err := time.Parse(time.RFC3339Nano, val)
				if err != nil {
					return Waveform{}, fail(lineNo, key, "%q, want RFC 3339 such as 2025-03-01T09:30:00Z", val)
				}
				start = t
			default:
				return Waveform{}, fail(lineNo, "", "unknown key %q (known: sampling_rate_hz, unit, label, start)", key)
			}
			continue
		}
		fields := strings.Split(line, ",")
		for i, f := range fields {
			f = strings.TrimSpace(f)
			if len(f) >= 2 && f[0] == '"' && f[len(f)-1] == '"' {
				f = strings.TrimSpace(f[1 : len(f)-1])
			}
			fields[i] = f
		}
		if !dataSeen && !headerSeen && hasLetter(line) && !looksNumeric(fields[0]) {
			headerSeen = true
			switch {
			case len(fields) == 1:
			case len(fields) == 2 && strings.EqualFold(fields[0], "time_s"):
				timeCol = true
			default:
				return Waveform{}, fail(lineNo, "header", "%q, want mV, uV, time_s,mV or time_s,uV", line)
			}
			if u := strings.ToLower(fields[len(fields)-1]); u != "mv" && u != "uv" && u != "µv" {
				return Waveform{}, fail(lineNo, "header", "%q, want mV, uV, time_s,mV or time_s,uV", line)
			}
			if err := setUnit(fields[len(fields)-1], lineNo); err != nil {
				return Waveform{}, err
			}
			cols = len(fields)
			continue
		}
		if !dataSeen {
			dataSeen = true
			firstDataLine = lineNo
			if cols == 0 {
				cols = len(fields)
				timeCol = cols == 2
			}
			if cols > 2 {
				return Waveform{}, fail(lineNo, "", "%d fields, want 1 (sample) or 2 (time_s, sample)", cols)
			}
		}
		if len(fields) != cols {
			return Waveform{}, fail(lineNo, "", "%d fields, want %d like line %d", len(fields), cols, firstDataLine)
		}
		v, err := parseDecimal(fields[cols-1])
		if err != nil {
			return Waveform{}, fail(lineNo, "sample", "%v", err)
		}
		samples = append(samples, v)
		if timeCol {
			t, err := parseDecimal(fields[0])
			if err != nil {
				return Waveform{}, fail(lineNo, "time_s", "%v", err)
			}
			if n := len(times); n > 0 && !(t > times[n-1]) {
				return Waveform{}, fail(lineNo, "time_s", "%g s does not follow %g s", t, times[n-1])
			}
			times = append(times, t)
			timeLines = append(timeLines, lineNo)
		}
	}

	if len(samples) == 0 {
		return Waveform{}, fail(max(lineNo, 1), "", "no samples")
	}
	if opt.RateHz != 0 {
		if !(opt.RateHz > 0) || math.IsInf(opt.RateHz, 0) {
			return Waveform{}, fmt.Errorf("ecg: csv: sampling rate option %g Hz is not positive", opt.RateHz)
		}
		if rate != 0 && math.Abs(rate-opt.RateHz) > 1e-9*rate {
			return Waveform{}, fail(rateLine, "sampling_rate_hz", "%g Hz contradicts the %g Hz given by the caller", rate, opt.RateHz)
		}
		rate = opt.RateHz
	}
	if opt.Unit != "" {
		var u string
		switch strings.ToLower(opt.Unit) {
		case "mv":
			u = "mV"
		case "uv", "µv":
			u = "uV"
		default:
			return Waveform{}, fmt.Errorf("ecg: csv: unit option %q, want mV or uV", opt.Unit)
		}
		if unit != "" && unit != u {
			return Waveform{}, fail(unitLine, "unit", "%s contradicts the %s given by the caller", unit, u)
		}
		unit = u
	}
	if timeCol {
		if rate == 0 {
			if len(times) < 2 {
				return Waveform{}, fail(firstDataLine, "time_s", "one row cannot give a sampling rate; add # sampling_rate_hz=")
			}
			rate = float64(len(times)-1) / (times[len(times)-1] - times[0])
		}
		for i, t := range times {
			if want := times[0] + float64(i)/rate; math.Abs(t-want) > 0.5/rate {
				return Waveform{}, fail(timeLines[i], "time_s",
					"%g s is off the %g Hz grid (expected %g s); samples must be evenly spaced", t, rate, want)
			}
		}
		if !start.IsZero() {
			start = start.Add(time.Duration(math.Round(times[0] * 1e9)))
		}
	}
	if rate == 0 {
		return Waveform{}, fail(firstDataLine, "", "sampling rate missing: add a line \"# sampling_rate_hz=...\", a time_s column, or pass the rate")
	}
	if rate < MinFileRateHz || rate > MaxFileRateHz {
		line := rateLine
		if line == 0 {
			line = firstDataLine
		}
		return Waveform{}, fail(line, "sampling_rate_hz", "%g Hz outside %d-%d Hz", rate, MinFileRateHz, MaxFileRateHz)
	}
	if unit == "" {
		unit = "mV"
	}
	if unit == "uV" {
		for i := range samples {
			samples[i] /= 1000
		}
	}
	if label == "" {
		label = opt.Label
	}
	if label == "" {
		label = "ECG"
	}
	src := fmt.Sprintf("CSV, %g Hz, %s, %d samples", rate, unit, len(samples))
	if timeCol {
		src += ", time column"
	}
	return Waveform{Samples: samples, RateHz: rate, Start: start, Label: label, Source: src}, nil
}

func isKey(s string) bool {
	if s == "" {
		return false
	}
	for i := 0; i < len(s); i++ {
		c := s[i]
		if !(c >= 'a' && c <= 'z' || c == '_' || c >= '0' && c <= '9') {
			return false
		}
	}
	return true
}

func hasLetter(s string) bool {
	for _, r := range s {
		if r >= 'a' && r <= 'z' || r >= 'A' && r <= 'Z' {
			return true
		}
	}
	return false
}

func looksNumeric(s string) bool {
	_, err := strconv.ParseFloat(s, 64)
	return err == nil
}

func firstInvalidUTF8(b []byte) int {
	for i := 0; i < len(b); {
		r, n := utf8.DecodeRune(b[i:])
		if r == utf8.RuneError && n <= 1 {
			return i
		}
		i += n
	}
	return len(b)
}
