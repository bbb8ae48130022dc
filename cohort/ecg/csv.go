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

// ReadCSV reads our plain-text waveform format (see ReadCSVSignals) and
// returns the ECG lead chosen for analysis.
func ReadCSV(data []byte, opt CSVOptions) (Waveform, error) {
	c, err := ReadCSVSignals(data, opt)
	if err != nil {
		return Waveform{}, err
	}
	return c.Leads[c.Chosen].Waveform, nil
}

// csvColumn is one signal column of a CSV file.
type csvColumn struct {
	label, unit string
	scale       float64 // mV per unit; 0 when the unit is not a voltage
	samples     []float64
}

// ReadCSVSignals reads our plain-text waveform format, version 1:
//
//	# sampling_rate_hz=500
//	# unit=uV
//	# label=ECG lead I
//	# start=2025-03-01T09:30:00Z
//	time_s,uV
//	0.000,12
//	0.002,15
//
// or, with several signals, a header row naming each column with its unit:
//
//	# sampling_rate_hz=250
//	time_s,Accel X (g),ECG I (mV),ECG II (mV)
//	0.000,0.01,0.12,0.20
//
// The rules:
//   - UTF-8 (a byte-order mark is skipped), lines end in LF or CRLF; blank
//     lines are ignored.
//   - A line starting with '#' is a comment. A comment "# key=value" sets
//     metadata and must come before the first data row; the keys are
//     sampling_rate_hz, unit (mV or uV), label and start (RFC 3339). Any other
//     key, or metadata among the data, is an error, so a misspelt or misplaced
//     rate is not silently ignored. unit and label apply to a signal column
//     the header does not name.
//   - An optional header row comes first. Its first field may be time_s;
//     every other field is a unit (mV or uV, any letter case) or a signal's
//     name with its unit in parentheses or brackets ("ECG I (mV)", "Accel
//     X [g]"). Without a header a row holds one sample, or a time in seconds
//     and a sample.
//   - Each data row has as many fields as the first, separated by commas;
//     fields may be surrounded by spaces or double quotes. ECG columns
//     (Classify: an ECG label or a lead name, in volts) hold numbers; other
//     columns are listed and not read.
//   - The sampling rate comes from CSVOptions, the metadata, or, failing both,
//     the time column. With a time column, every time must lie within half a
//     sample of first + i/rate, since a Waveform has evenly spaced samples.
//
// Errors are *InputError values with the 1-based line number.
func ReadCSVSignals(data []byte, opt CSVOptions) (Contents, error) {
	fail := func(line int, field string, format string, args ...any) error {
		return &InputError{Format: "csv", Line: line, Field: field, Err: fmt.Errorf(format, args...)}
	}
	data = bytes.TrimPrefix(data, []byte("\xef\xbb\xbf"))
	if !utf8.Valid(data) {
		line := 1 + bytes.Count(data[:firstInvalidUTF8(data)], []byte("\n"))
		return Contents{}, fail(line, "", "not valid UTF-8")
	}

	var (
		rate, rateLine = 0.0, 0
		unit, unitLine = "", 0
		label          string
		start          time.Time
		headerSeen     bool
		headerLine     int
		dataSeen       bool
		nfields        int
		timeCol        bool
		cols           []*csvColumn
		times          []float64
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
	const headerWant = "want a unit (mV or uV) or a signal's name with its unit in parentheses, e.g. ECG I (mV), after an optional time_s"

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
				return Contents{}, fail(lineNo, key, "metadata must come before the first data row (line %d)", firstDataLine)
			}
			switch key {
			case "sampling_rate_hz":
				v, err := strconv.ParseFloat(val, 64)
				if err != nil || !(v > 0) || math.IsInf(v, 0) {
					return Contents{}, fail(lineNo, key, "%q is not a positive number", val)
				}
				rate, rateLine = v, lineNo
			case "unit":
				if err := setUnit(val, lineNo); err != nil {
					return Contents{}, err
				}
			case "label":
				label = val
			case "start":
				t, err := time.Parse(time.RFC3339Nano, val)
				if err != nil {
					return Contents{}, fail(lineNo, key, "%q, want RFC 3339 such as 2025-03-01T09:30:00Z", val)
				}
				start = t
			default:
				return Contents{}, fail(lineNo, "", "unknown key %q (known: sampling_rate_hz, unit, label, start)", key)
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
			headerSeen, headerLine = true, lineNo
			rest := fields
			if strings.EqualFold(fields[0], "time_s") {
				timeCol, rest = true, fields[1:]
			}
			if len(rest) == 0 {
				return Contents{}, fail(lineNo, "header", "%q has no signal column; %s", line, headerWant)
			}
			for _, f := range rest {
				name, u, ok := splitColumn(f)
				if !ok {
					return Contents{}, fail(lineNo, "header", "%q: %s", f, headerWant)
				}
				if name == "" { // a bare unit: the metadata's signal
					if err := setUnit(u, lineNo); err != nil {
						return Contents{}, err
					}
				}
				cols = append(cols, &csvColumn{label: name, unit: u})
			}
			nfields = len(fields)
			continue
		}
		if !dataSeen {
			dataSeen = true
			firstDataLine = lineNo
			if nfields == 0 {
				nfields = len(fields)
				if nfields > 2 {
					return Contents{}, fail(lineNo, "", "%d fields without a header row naming the columns; want 1 (sample) or 2 (time_s, sample), or a header", nfields)
				}
				timeCol = nfields == 2
				cols = []*csvColumn{{}}
			}
		}
		if len(fields) != nfields {
			return Contents{}, fail(lineNo, "", "%d fields, want %d like line %d", len(fields), nfields, firstDataLine)
		}
		vals := fields
		if timeCol {
			vals = fields[1:]
		}
		for k, c := range cols {
			if c.label != "" && c.scale == 0 && c.unit != "" {
				if sc, ok := mvPerUnit(c.unit); !ok || Classify(c.label, c.unit) != KindECG && Classify(c.label, c.unit) != KindUnlabelled {
					continue // listed, not read
				} else {
					c.scale = sc
				}
			}
			v, err := parseDecimal(vals[k])
			if err != nil {
				name := "sample"
				if c.label != "" {
					name = c.label
				}
				return Contents{}, fail(lineNo, name, "%v", err)
			}
			c.samples = append(c.samples, v)
		}
		if timeCol {
			t, err := parseDecimal(fields[0])
			if err != nil {
				return Contents{}, fail(lineNo, "time_s", "%v", err)
			}
			if n := len(times); n > 0 && !(t > times[n-1]) {
				return Contents{}, fail(lineNo, "time_s", "%g s does not follow %g s", t, times[n-1])
			}
			times = append(times, t)
			timeLines = append(timeLines, lineNo)
		}
	}

	if !dataSeen {
		return Contents{}, fail(max(lineNo, 1), "", "no samples")
	}
	if opt.RateHz != 0 {
		if !(opt.RateHz > 0) || math.IsInf(opt.RateHz, 0) {
			return Contents{}, fmt.Errorf("ecg: csv: sampling rate option %g Hz is not positive", opt.RateHz)
		}
		if rate != 0 && math.Abs(rate-opt.RateHz) > 1e-9*rate {
			return Contents{}, fail(rateLine, "sampling_rate_hz", "%g Hz contradicts the %g Hz given by the caller", rate, opt.RateHz)
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
			return Contents{}, fmt.Errorf("ecg: csv: unit option %q, want mV or uV", opt.Unit)
		}
		if unit != "" && unit != u {
			return Contents{}, fail(unitLine, "unit", "%s contradicts the %s given by the caller", unit, u)
		}
		unit = u
	}
	if timeCol {
		if rate == 0 {
			if len(times) < 2 {
				return Contents{}, fail(firstDataLine, "time_s", "one row cannot give a sampling rate; add # sampling_rate_hz=")
			}
			rate = float64(len(times)-1) / (times[len(times)-1] - times[0])
		}
		for i, t := range times {
			if want := times[0] + float64(i)/rate; math.Abs(t-want) > 0.5/rate {
				return Contents{}, fail(timeLines[i], "time_s",
					"%g s is off the %g Hz grid (expected %g s); samples must be evenly spaced", t, rate, want)
			}
		}
		if !start.IsZero() {
			start = start.Add(time.Duration(math.Round(times[0] * 1e9)))
		}
	}
	if rate == 0 {
		return Contents{}, fail(firstDataLine, "", "sampling rate missing: add a line \"# sampling_rate_hz=...\", a time_s column, or pass the rate")
	}
	if rate < MinFileRateHz || rate > MaxFileRateHz {
		line := rateLine
		if line == 0 {
			line = firstDataLine
		}
		return Contents{}, fail(line, "sampling_rate_hz", "%g Hz outside %d-%d Hz", rate, MinFileRateHz, MaxFileRateHz)
	}
	if unit == "" {
		unit = "mV"
	}
	if label == "" {
		label = opt.Label
	}
	if label == "" {
		label = "ECG"
	}
	c := Contents{Start: start}
	for i, col := range cols {
		if col.label == "" { // the metadata's signal
			col.label, col.unit = label, unit
			col.scale, _ = mvPerUnit(unit)
		}
		c.Signals = append(c.Signals, SignalInfo{Number: i + 1, Label: col.label, Unit: col.unit, RateHz: rate, Kind: Classify(col.label, col.unit)})
	}
	keep, chosen, warning, refusal := ChooseLead(c.Signals)
	if refusal != "" {
		return Contents{}, fail(max(headerLine, 1), "header", "%s", refusal)
	}
	if warning != "" {
		c.Warnings = append(c.Warnings, warning)
	}
	c.Chosen = chosen
	for _, num := range keep {
		col := cols[num-1]
		for i := range col.samples {
			col.samples[i] *= col.scale
		}
		src := fmt.Sprintf("CSV, %g Hz, %s, %d samples", rate, col.unit, len(col.samples))
		if len(cols) > 1 {
			src = fmt.Sprintf("CSV column %d of %d %q, %g Hz, %s, %d samples", num, len(cols), col.label, rate, col.unit, len(col.samples))
		}
		if timeCol {
			src += ", time column"
		}
		c.Leads = append(c.Leads, Lead{Signal: num, Waveform: Waveform{Samples: col.samples, RateHz: rate, Start: start, Label: col.label, Source: src}})
	}
	return c, nil
}

// splitColumn reads a header field: a bare unit (mV or uV), or a name with
// its unit in parentheses or brackets. ok is false for anything else.
func splitColumn(f string) (name, unit string, ok bool) {
	switch strings.ToLower(f) {
	case "mv", "uv", "µv":
		return "", f, true
	}
	for _, br := range [][2]string{{"(", ")"}, {"[", "]"}} {
		if strings.HasSuffix(f, br[1]) {
			if i := strings.LastIndex(f, br[0]); i > 0 {
				name = strings.TrimSpace(f[:i])
				unit = strings.TrimSpace(f[i+1 : len(f)-1])
				return name, unit, name != ""
			}
		}
	}
	return "", "", false
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
