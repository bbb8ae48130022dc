package ecg

import (
	"errors"
	"fmt"
	"math"
	"strings"
	"time"
)

// Waveform is one lead of an ECG recording, already in millivolts.
type Waveform struct {
	Samples []float64 // millivolts, one per sample, evenly spaced
	RateHz  float64   // samples per second
	// Start is the moment of the first sample when the source gives one, else
	// the zero time. A start date is an identifier under HIPAA Safe Harbor, so
	// treat it like the rest of the header when storing or exporting.
	Start time.Time
	Label string // the lead or channel name from the source, e.g. "ECG I"
	// Source says where the samples came from (format, channel, rate, units),
	// for an audit trail. It never holds patient or recording identification.
	Source string
}

// Seconds is the covered duration: samples divided by the rate, so a strip of
// 7500 samples at 250 Hz lasts exactly 30 s.
func (w Waveform) Seconds() float64 {
	if w.RateHz <= 0 {
		return 0
	}
	return float64(len(w.Samples)) / w.RateHz
}

// Duration is Seconds as a time.Duration.
func (w Waveform) Duration() time.Duration {
	return time.Duration(math.Round(w.Seconds() * float64(time.Second)))
}

// Limits on recordings. The rate bounds are ours (see the package comment);
// the 30 s minimum is the 2020 ESC AF guidelines' (verified, secondary).
const (
	MinRateHz            = 100.0
	MaxRateHz            = 2000.0
	MinDiagnosticSeconds = 30.0
)

// TooShort is the 30 s rule: a recording with fewer usable seconds cannot on
// its own support an AF diagnosis (its readings are kept but are not an
// over-read; see overread.Conclusion's Diagnostic).
func TooShort(usableSeconds float64) bool { return usableSeconds < MinDiagnosticSeconds }

// Sentinel errors, so callers can tell a bad file from a bad recording.
var (
	// ErrFormat marks input that does not follow its file format.
	ErrFormat = errors.New("malformed input")
	// ErrRecording marks a well-formed recording we refuse to analyse.
	ErrRecording = errors.New("unusable recording")
)

// InputError says what is wrong with an input file and where. Offset is a byte
// offset (EDF), Line a 1-based line number (CSV); Signal and Record are
// 1-based EDF signal and data-record numbers. Zero means "not applicable".
type InputError struct {
	Format string // "edf" or "csv"
	Field  string // the header field or column concerned, if any
	Offset int64  // byte offset of the field, when Format is "edf"
	Line   int    // line number, when Format is "csv"
	Signal int    // 1-based signal number, EDF only
	Record int    // 1-based data record number, EDF only
	Err    error  // what is wrong
}

// Error reads like "ecg: edf: signal 2 digital minimum (byte 1256): ...".
func (e *InputError) Error() string {
	var b strings.Builder
	b.WriteString("ecg: ")
	b.WriteString(e.Format)
	b.WriteString(": ")
	var where []string
	if e.Line > 0 {
		where = append(where, fmt.Sprintf("line %d", e.Line))
	}
	if e.Record > 0 {
		where = append(where, fmt.Sprintf("data record %d", e.Record))
	}
	if e.Signal > 0 {
		where = append(where, fmt.Sprintf("signal %d", e.Signal))
	}
	if e.Field != "" {
		where = append(where, e.Field)
	}
	if len(where) > 0 {
		b.WriteString(strings.Join(where, " "))
		if e.Format == "edf" {
			fmt.Fprintf(&b, " (byte %d)", e.Offset)
		}
		b.WriteString(": ")
	} else if e.Format == "edf" {
		fmt.Fprintf(&b, "byte %d: ", e.Offset)
	}
	b.WriteString(e.Err.Error())
	return b.String()
}

// Unwrap exposes the cause.
func (e *InputError) Unwrap() error { return e.Err }

// Is makes every InputError match ErrFormat.
func (e *InputError) Is(target error) bool { return target == ErrFormat }

// RecordingCheck is what CheckRecording learns about a recording.
type RecordingCheck struct {
	Samples int
	Seconds float64
	// TooShortForDiagnosis is set below MinDiagnosticSeconds: the strip may
	// still be shown and scored, but it cannot on its own support an AF
	// diagnosis, and the over-read form should say so.
	TooShortForDiagnosis bool
}

// CheckRecording refuses recordings that beat detection cannot handle and
// reports their length. Errors wrap ErrRecording.
func CheckRecording(w Waveform) (RecordingCheck, error) {
	if math.IsNaN(w.RateHz) || w.RateHz < MinRateHz || w.RateHz > MaxRateHz {
		return RecordingCheck{}, fmt.Errorf("ecg: sampling rate %g Hz outside %g-%g Hz: %w", w.RateHz, MinRateHz, MaxRateHz, ErrRecording)
	}
	if len(w.Samples) == 0 {
		return RecordingCheck{}, fmt.Errorf("ecg: recording has no samples: %w", ErrRecording)
	}
	for i, v := range w.Samples {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return RecordingCheck{}, fmt.Errorf("ecg: sample %d is %v: %w", i, v, ErrRecording)
		}
	}
	c := RecordingCheck{Samples: len(w.Samples), Seconds: w.Seconds()}
	c.TooShortForDiagnosis = TooShort(c.Seconds)
	return c, nil
}
