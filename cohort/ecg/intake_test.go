package ecg_test

import (
	"crypto/sha256"
	"errors"
	"fmt"
	"math"
	"slices"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/ecg"
	"cohortdesk/cohort/ecg/ecgtest"
	"cohortdesk/cohort/overread"
	"cohortdesk/cohort/rr"
)

// identCanary is written into the EDF patient and recording identification
// fields; intake must drop it.
const identCanary = "Quillonby-Marsh"

var (
	intakeNow = time.Date(2026, 6, 10, 15, 0, 0, 0, time.UTC)
	flagged   = time.Date(2026, 6, 2, 9, 0, 0, 0, time.UTC)
)

func intakeOptions() ecg.IntakeOptions {
	return ecg.IntakeOptions{Now: intakeNow, StudyZone: time.UTC, RecorderZone: time.UTC, FlaggedAt: flagged, HintParams: rr.DefaultParams()}
}

// sinusStrip is a synthetic sinus ECG of about seconds at rate Hz (McSharry
// et al. 2003 model, package ecg) with its true beat count.
func sinusStrip(t *testing.T, seconds, rate float64, seed uint64) (ecg.Waveform, int) {
	t.Helper()
	syn, err := ecg.Synthesize(ecgtest.SinusRR(int(seconds/0.8), 800, seed), ecg.SynthOptions{RateHz: rate})
	if err != nil {
		t.Fatal(err)
	}
	return syn.Waveform, len(syn.RTimes)
}

func edfOf(t *testing.T, w ecg.Waveform, plus bool) []byte {
	t.Helper()
	b, err := ecgtest.EncodeEDF(w, ecgtest.EDFWriteOptions{Plus: plus, Patient: identCanary + " F 02-MAR-1951",
		Recording: "Startdate 01-JUN-2026 " + identCanary})
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// fields returns the field messages of a refusal, or fails.
func fields(t *testing.T, err error) map[string]string {
	t.Helper()
	var ve *cohort.ValidationError
	if !errors.As(err, &ve) {
		t.Fatalf("got %v, want a validation error", err)
	}
	return ve.Fields
}

// TestIntakeFormats takes an EDF, an EDF+, a CSV file and samples through
// intake: the format is recognised by content, the beats of the synthetic
// ECG are all found (known R-peak times, McSharry et al. 2003 model), the
// hint is scored with the given parameters, the samples are at the stored
// resolution (whole microvolts), and the EDF identification fields are
// nowhere in the result.
func TestIntakeFormats(t *testing.T) {
	w, want := sinusStrip(t, 40, 250, 3)
	taken := intakeNow.Add(-time.Hour)
	for _, tc := range []struct {
		format string
		in     ecg.RecordingInput
	}{
		{"edf", ecg.RecordingInput{File: edfOf(t, w, false), FileName: "  strip.edf "}},
		{"edf+", ecg.RecordingInput{File: edfOf(t, w, true), FileName: "strip.edf"}},
		{"csv", ecg.RecordingInput{File: ecgtest.EncodeCSV(w), FileName: "strip.csv"}},
		{"samples", ecg.RecordingInput{Samples: w.Samples, RateHz: w.RateHz}},
	} {
		t.Run(tc.format, func(t *testing.T) {
			in := tc.in
			in.TakenAt, in.Auto = taken, overread.AutoSuggestsRegular
			got, err := ecg.Intake(in, intakeOptions())
			if err != nil {
				t.Fatal(err)
			}
			sig := got.Signal
			if sig == nil || sig.Format != tc.format || sig.Waveform.RateHz != 250 || got.Auto != overread.AutoSuggestsRegular || got.TooShort {
				t.Fatalf("accepted %+v", got)
			}
			if len(sig.Beats) != want || sig.Hint.Beats != want {
				t.Errorf("%d beats (hint %d), want %d", len(sig.Beats), sig.Hint.Beats, want)
			}
			if !strings.HasPrefix(sig.Hint.Text, "Hint for the over-reader, not a verdict") || sig.Hint.Summary.Segments != 1 ||
				sig.Hint.Summary.AFLike != 0 || sig.Hint.Params != rr.DefaultParams() {
				t.Errorf("hint %+v", sig.Hint)
			}
			// EDF pads its last 1 s data record (ecgtest.EncodeEDF), so up
			// to one second more.
			if got.DurationS < 39 || got.DurationS > 42 || got.DurationS != math.Round(got.DurationS*1000)/1000 {
				t.Errorf("duration %v", got.DurationS)
			}
			for i, v := range sig.Waveform.Samples {
				if math.Abs(v*1000-math.Round(v*1000)) > 1e-9 {
					t.Fatalf("sample %d is %v mV, not whole microvolts", i, v)
				}
			}
			// The beats are those a detection on the stored samples finds.
			again, err := ecg.Detect(sig.Waveform)
			if err != nil || !slices.Equal(again.Beats, sig.Beats) {
				t.Errorf("detection on the stored samples differs: %v", err)
			}
			if len(in.File) > 0 {
				if sum := sha256.Sum256(in.File); !slices.Equal(sig.FileSHA256, sum[:]) {
					t.Error("file digest")
				}
			} else if sig.FileSHA256 != nil {
				t.Error("samples carry a file digest")
			}
			if got.FileName != strings.TrimSpace(in.FileName) {
				t.Errorf("file name %q", got.FileName)
			}
			if s := fmt.Sprintf("%+v", got); strings.Contains(s, identCanary) {
				t.Error("the EDF identification reached the result")
			}
		})
	}
}

// TestIntakeRefusals: each bad input is refused with a message on its field
// that says what and where: the EDF header field with its byte offset (EDF
// specification, Kemp et al. 1992), the CSV line, the rate, the times.
func TestIntakeRefusals(t *testing.T) {
	w, _ := sinusStrip(t, 40, 250, 4)
	good := edfOf(t, w, false)
	badSignals := slices.Clone(good)
	copy(badSignals[252:256], "x1  ") // number of signals, header bytes 252-255 (EDF specification)
	badPhys := slices.Clone(good)
	// physical minimum of signal 1: fixed header 256 bytes, then label 16,
	// transducer 80, dimension 8 per signal; one signal, so byte 360.
	copy(badPhys[360:368], "minus 1 ")
	low, _ := sinusStrip(t, 40, 250, 5)
	long, _ := sinusStrip(t, 40, 250, 6)
	for len(long.Samples) < (ecg.MaxRecordingSeconds+1)*250 {
		long.Samples = append(long.Samples, long.Samples[:10000]...)
	}
	now := intakeNow
	for _, tc := range []struct {
		name  string
		in    ecg.RecordingInput
		field string
		want  []string // words the message must contain
	}{
		{"edf number of signals", ecg.RecordingInput{TakenAt: now, File: badSignals}, "waveform", []string{"not usable EDF", "number of signals", "byte 252", "Nothing was stored."}},
		{"edf physical minimum", ecg.RecordingInput{TakenAt: now, File: badPhys}, "waveform", []string{"physical minimum", "byte 360", "signal 1"}},
		{"edf truncated", ecg.RecordingInput{TakenAt: now, File: good[:len(good)/2]}, "waveform", []string{"EDF"}},
		{"csv bad line", ecg.RecordingInput{TakenAt: now, File: []byte("# sampling_rate_hz=250\nmV\n0.1\n0.2\nabc\n0.3\n")}, "waveform", []string{"waveform CSV", "line 5"}},
		{"csv no rate", ecg.RecordingInput{TakenAt: now, File: []byte("mV\n0.1\n0.2\n")}, "waveform", []string{"rate"}},
		{"rate too low", ecg.RecordingInput{TakenAt: now, Samples: low.Samples, RateHz: 50}, "waveform", []string{"cannot be analysed", "50 Hz"}},
		{"too long", ecg.RecordingInput{TakenAt: now, Samples: long.Samples, RateHz: 250}, "waveform", []string{"longer than the 900 s"}},
		{"file and samples", ecg.RecordingInput{TakenAt: now, File: good, Samples: w.Samples, RateHz: 250}, "waveform", []string{"either a file or samples"}},
		{"file too large", ecg.RecordingInput{TakenAt: now, File: make([]byte, ecg.MaxFileBytes+1)}, "waveform", []string{"larger than 32 MiB"}},
		{"no duration", ecg.RecordingInput{TakenAt: now}, "duration_s", []string{"duration"}},
		{"duration too long", ecg.RecordingInput{TakenAt: now, DurationS: 901}, "duration_s", []string{"at most 900"}},
		{"no time", ecg.RecordingInput{DurationS: 40}, "taken_at", []string{"taken"}},
		{"future", ecg.RecordingInput{TakenAt: now.Add(time.Hour), DurationS: 40}, "taken_at", []string{"future"}},
		{"before the flag", ecg.RecordingInput{TakenAt: flagged.AddDate(0, 0, -1), DurationS: 40}, "taken_at", []string{"flagged", "2 Jun 2026"}},
		{"received in the future", ecg.RecordingInput{TakenAt: now, ReceivedAt: now.AddDate(0, 0, 1), DurationS: 40}, "received_on", []string{"future"}},
		{"received before taken", ecg.RecordingInput{TakenAt: now, ReceivedAt: now.AddDate(0, 0, -1), DurationS: 40}, "received_on", []string{"before it was taken"}},
		{"bad auto", ecg.RecordingInput{TakenAt: now, DurationS: 40, Auto: "maybe"}, "auto", []string{"readings of the recorder"}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := ecg.Intake(tc.in, intakeOptions())
			msg := fields(t, err)[tc.field]
			t.Logf("%s: %s", tc.field, msg)
			if msg == "" {
				t.Fatalf("no message on %q: %v", tc.field, err)
			}
			for _, w := range tc.want {
				if !strings.Contains(msg, w) {
					t.Errorf("message %q does not say %q", msg, w)
				}
			}
		})
	}
	// All problems come at once.
	f := fields(t, func() error {
		_, err := ecg.Intake(ecg.RecordingInput{File: badSignals, Auto: "maybe"}, intakeOptions())
		return err
	}())
	if f["waveform"] == "" || f["auto"] == "" || f["taken_at"] == "" {
		t.Errorf("fields %v, want waveform, auto and taken_at together", f)
	}
}

// TestIntakeSettles: the times and the rest are settled as the store keeps
// them: the file's start when no time is given (an EDF start is a clock time
// in the recorder's zone), arrival now when not given and never before the
// recording, no interpretation taken as none, and under 30 s marked too short
// for a diagnostic read (2020 ESC AF guidelines; verified, secondary).
func TestIntakeSettles(t *testing.T) {
	zone := time.FixedZone("recorder", -5*3600)
	w, _ := sinusStrip(t, 20, 250, 7)
	w.Start = time.Date(2026, 6, 9, 8, 30, 0, 0, time.UTC) // EncodeEDF writes the clock time 08.30.00
	o := intakeOptions()
	o.RecorderZone = zone
	got, err := ecg.Intake(ecg.RecordingInput{File: edfOf(t, w, true)}, o)
	if err != nil {
		t.Fatal(err)
	}
	if want := time.Date(2026, 6, 9, 8, 30, 0, 0, zone); !got.TakenAt.Equal(want) {
		t.Errorf("taken at %v, want the file's start %v", got.TakenAt, want)
	}
	if !got.ReceivedAt.Equal(intakeNow) || got.Auto != overread.AutoNoReading || !got.TooShort || got.DurationS >= 30 {
		t.Errorf("accepted %+v", got)
	}
	// Arrival the same day an hour before the recording time: kept in the
	// order of events.
	taken := intakeNow.Add(-time.Hour)
	got, err = ecg.Intake(ecg.RecordingInput{TakenAt: taken, ReceivedAt: taken.Add(-time.Hour), DurationS: 30}, intakeOptions())
	if err != nil {
		t.Fatal(err)
	}
	if !got.ReceivedAt.Equal(taken) || got.TooShort || got.Signal != nil {
		t.Errorf("accepted %+v", got)
	}
}

// TestMicrovolts: the stored resolution rounds to the microvolt and clips to
// the int16 range.
func TestMicrovolts(t *testing.T) {
	for _, tc := range []struct {
		mv   float64
		want int16
	}{{0, 0}, {1.2344, 1234}, {1.2346, 1235}, {-0.0005, -1}, {40, math.MaxInt16}, {-40, math.MinInt16}} {
		if got := ecg.Microvolts(tc.mv); got != tc.want {
			t.Errorf("Microvolts(%v) = %d, want %d", tc.mv, got, tc.want)
		}
	}
}

// FuzzIntake: whatever the file, intake either refuses it with field
// messages or accepts a recording whose beats lie inside its samples.
func FuzzIntake(f *testing.F) {
	w := ecg.Waveform{Samples: make([]float64, 1000), RateHz: 250}
	for i := range w.Samples {
		w.Samples[i] = math.Sin(float64(i) / 20)
	}
	for _, plus := range []bool{false, true} {
		b, err := ecgtest.EncodeEDF(w, ecgtest.EDFWriteOptions{Plus: plus})
		if err != nil {
			f.Fatal(err)
		}
		f.Add(b, 0.0)
	}
	f.Add(ecgtest.EncodeCSV(w), 0.0)
	f.Add([]byte("mV\n0.1\n0.2\n"), 250.0)
	f.Fuzz(func(t *testing.T, data []byte, rate float64) {
		got, err := ecg.Intake(ecg.RecordingInput{TakenAt: intakeNow, File: data, CSVRateHz: rate}, intakeOptions())
		if err != nil {
			var ve *cohort.ValidationError
			if !errors.As(err, &ve) || len(ve.Fields) == 0 {
				t.Fatalf("refusal %v is not a validation error with fields", err)
			}
			return
		}
		if got.Signal == nil {
			t.Fatal("a file accepted without its signal")
		}
		for _, b := range got.Signal.Beats {
			if b < 0 || b >= len(got.Signal.Waveform.Samples) {
				t.Fatalf("beat %d outside %d samples", b, len(got.Signal.Waveform.Samples))
			}
		}
	})
}
