package ecg_test

import (
	"archive/zip"
	"bytes"
	"fmt"
	"math"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort/ecg"
	"cohortdesk/cohort/ecg/ecgtest"
)

// motionChannel is an accelerometer axis in g: slow swings of 0.2 g.
func motionChannel(n int, rate float64, label string) ecgtest.EDFChannel {
	v := make([]float64, n)
	for i := range v {
		v[i] = 0.2 * math.Sin(2*math.Pi*0.7*float64(i)/rate)
	}
	return ecgtest.EDFChannel{Label: label, Dimension: "g", Values: v, RateHz: rate}
}

// markerChannel is an event channel without a unit: mostly 0, a press at 5 s.
func markerChannel(n int, rate float64) ecgtest.EDFChannel {
	v := make([]float64, n)
	for i := int(5 * rate); i < int(5.5*rate) && i < n; i++ {
		v[i] = 1
	}
	return ecgtest.EDFChannel{Label: "Marker", Dimension: "", Values: v, RateHz: rate}
}

// Files with two and three signals, the ECG in every position and its unit
// in each standard text (and in the spellings real files use), go through
// intake: the ECG is found, analysed with all its beats, and the other
// signals are listed, never analysed.
func TestIntakeFindsTheECGAmongSignals(t *testing.T) {
	const rate = 250.0
	syn := mustSynth(t, ecgtest.SinusRR(40, 800, 7), ecg.SynthOptions{RateHz: rate, Seed: 7})
	w := syn.Waveform
	n := len(w.Samples)
	units := []struct {
		text string // written as ECGChannel scales it
		raw  []byte // bytes patched into the header, when not ASCII
	}{
		{"uV", nil}, {"mV", nil}, {"V", nil}, {"UV", nil}, {"MV", nil},
		{"µV", []byte{0xB5, 'V'}},       // the Latin-1 micro sign
		{"µV", []byte{0xCE, 0xBC, 'V'}}, // the Greek mu in UTF-8
		{"mv", nil},
	}
	layouts := [][]string{
		{"ECG", "Accel X"}, {"Accel X", "ECG"},
		{"ECG", "Accel X", "Marker"}, {"Accel X", "ECG", "Marker"}, {"Accel X", "Marker", "ECG"},
	}
	for ui, u := range units {
		for _, layout := range layouts {
			name := fmt.Sprintf("%s/%s", u.text, strings.Join(layout, ","))
			t.Run(name, func(t *testing.T) {
				var chs []ecgtest.EDFChannel
				ecgAt := 0
				for i, l := range layout {
					switch l {
					case "ECG":
						chs = append(chs, ecgtest.ECGChannel(w, "ECG", u.text))
						ecgAt = i
					case "Accel X":
						chs = append(chs, motionChannel(n, rate, l))
					case "Marker":
						chs = append(chs, markerChannel(n, rate))
					}
				}
				b, err := ecgtest.EncodeEDFChannels(chs, time.Time{}, ecgtest.EDFWriteOptions{Plus: ui%2 == 1})
				if err != nil {
					t.Fatal(err)
				}
				if u.raw != nil {
					ecgtest.PatchEDFDimension(b, ecgAt, u.raw)
				}
				acc, err := ecg.Intake(ecg.RecordingInput{File: b, FileName: "multi.edf", TakenAt: intakeNow.Add(-time.Hour)}, intakeOptions())
				if err != nil {
					t.Fatal(err)
				}
				sig := acc.Signal
				if sig.Waveform.Label != "ECG" || len(sig.Signals) != len(layout) || len(sig.Leads) != 0 {
					t.Fatalf("analysed %q of %d signals (%d leads)", sig.Waveform.Label, len(sig.Signals), len(sig.Leads))
				}
				for i, s := range sig.Signals {
					want := map[string]ecg.SignalKind{"ECG": ecg.KindECG, "Accel X": ecg.KindMotion, "Marker": ecg.KindMarker}[layout[i]]
					if s.Kind != want || s.Number != i+1 {
						t.Errorf("signal %d listed as %+v, want kind %s", i+1, s, want)
					}
				}
				if got, want := len(sig.Beats), len(syn.RTimes); got != want {
					t.Errorf("%d beats, want %d", got, want)
				}
				// The scale is right: the R peaks stand about 1 mV (the
				// synthetic amplitude) above the baseline.
				peak := 0.0
				for _, b := range sig.Beats {
					peak = math.Max(peak, sig.Waveform.Samples[b])
				}
				if peak < 0.7 || peak > 1.5 {
					t.Errorf("tallest R peak %g mV: the unit %q was not read as the right scale", peak, u.text)
				}
			})
		}
	}
}

// With several ECG leads, lead I is analysed first (or a lead the label
// does not name, the recorder's own), then lead II; every lead is analysed
// so a reader can switch. A voltage signal that names another modality
// (EEG) is never taken for the ECG.
func TestIntakeChoosesTheLead(t *testing.T) {
	const rate = 250.0
	syn := mustSynth(t, ecgtest.SinusRR(40, 800, 8), ecg.SynthOptions{RateHz: rate, Seed: 8})
	w := syn.Waveform
	inverted := w
	inverted.Samples = make([]float64, len(w.Samples))
	for i, v := range w.Samples {
		inverted.Samples[i] = -0.6 * v
	}
	tests := []struct {
		labels []string
		want   string
	}{
		{[]string{"EEG Fpz-Cz", "ECG"}, "ECG"},
		{[]string{"ECG II", "ECG I", "ECG V1"}, "ECG I"},
		{[]string{"MLII", "V5"}, "MLII"},
		{[]string{"V1", "ECG"}, "ECG"},
		{[]string{"Lead III", "Lead II"}, "Lead II"},
	}
	for _, tt := range tests {
		var chs []ecgtest.EDFChannel
		for i, l := range tt.labels {
			src := w
			if i%2 == 1 {
				src = inverted
			}
			chs = append(chs, ecgtest.ECGChannel(src, l, "uV"))
		}
		b, err := ecgtest.EncodeEDFChannels(chs, time.Time{}, ecgtest.EDFWriteOptions{})
		if err != nil {
			t.Fatal(err)
		}
		acc, err := ecg.Intake(ecg.RecordingInput{File: b, TakenAt: intakeNow.Add(-time.Hour)}, intakeOptions())
		if err != nil {
			t.Fatalf("%v: %v", tt.labels, err)
		}
		sig := acc.Signal
		if sig.Waveform.Label != tt.want {
			t.Errorf("%v: analysed %q, want %q", tt.labels, sig.Waveform.Label, tt.want)
		}
		ecgs := 0
		for _, s := range sig.Signals {
			if s.Kind == ecg.KindECG {
				ecgs++
			}
		}
		if ecgs > 1 {
			if len(sig.Leads) != ecgs || sig.Leads[sig.Lead].Waveform.Label != tt.want {
				t.Errorf("%v: %d leads analysed, want %d with %q shown", tt.labels, len(sig.Leads), ecgs, tt.want)
			}
			for _, l := range sig.Leads {
				if len(l.Beats) != len(syn.RTimes) {
					t.Errorf("%v: lead %q has %d beats, want %d", tt.labels, l.Waveform.Label, len(l.Beats), len(syn.RTimes))
				}
			}
		}
	}
}

// A file without an ECG is refused with the list of what it holds; a
// signal with an ECG label in a unit that is not a voltage is named.
func TestIntakeRefusesAFileWithoutECG(t *testing.T) {
	const rate = 250.0
	n := int(40 * rate)
	b, err := ecgtest.EncodeEDFChannels([]ecgtest.EDFChannel{motionChannel(n, rate, "Accel X"), markerChannel(n, rate)}, time.Time{}, ecgtest.EDFWriteOptions{})
	if err != nil {
		t.Fatal(err)
	}
	_, err = ecg.Intake(ecg.RecordingInput{File: b, TakenAt: intakeNow.Add(-time.Hour)}, intakeOptions())
	msg := fields(t, err)["waveform"]
	for _, want := range []string{"no ECG signal", `signal 1 "Accel X" (g, 250 Hz, motion)`, `signal 2 "Marker" (no unit, 250 Hz, marker)`, "Nothing was stored"} {
		if !strings.Contains(msg, want) {
			t.Errorf("refusal %q lacks %q", msg, want)
		}
	}
}

// A CSV file with several columns: the ECG column is found by its header,
// the motion column listed.
func TestIntakeCSVColumns(t *testing.T) {
	syn := mustSynth(t, ecgtest.SinusRR(40, 800, 9), ecg.SynthOptions{RateHz: 250, Seed: 9})
	var b strings.Builder
	b.WriteString("# sampling_rate_hz=250\ntime_s,Accel Z (g),ECG lead I (uV)\n")
	for i, v := range syn.Waveform.Samples {
		fmt.Fprintf(&b, "%.3f,%.3f,%.0f\n", float64(i)/250, 0.1*math.Sin(float64(i)/50), v*1000)
	}
	acc, err := ecg.Intake(ecg.RecordingInput{File: []byte(b.String()), TakenAt: intakeNow.Add(-time.Hour)}, intakeOptions())
	if err != nil {
		t.Fatal(err)
	}
	sig := acc.Signal
	if sig.Format != "csv" || sig.Waveform.Label != "ECG lead I" || len(sig.Signals) != 2 || sig.Signals[0].Kind != ecg.KindMotion {
		t.Fatalf("format %s, lead %q, signals %+v", sig.Format, sig.Waveform.Label, sig.Signals)
	}
	if len(sig.Beats) != len(syn.RTimes) {
		t.Errorf("%d beats, want %d", len(sig.Beats), len(syn.RTimes))
	}
}

// A WFDB record uploads as its header and signal file together, loose or
// in a zip file; both give one digest, and the annotation file that comes
// along is not needed.
func TestIntakeWFDBUploads(t *testing.T) {
	syn := mustSynth(t, ecgtest.SinusRR(45, 800, 10), ecg.SynthOptions{RateHz: 360, Seed: 10})
	files, err := ecgtest.ECGWFDB("r1", syn, 212, nil)
	if err != nil {
		t.Fatal(err)
	}
	taken := intakeNow.Add(-time.Hour)
	loose := ecg.RecordingInput{File: files.Signal, FileName: "r1.dat", TakenAt: taken,
		More: []ecg.File{{Name: "r1.hea", Data: files.Header}, {Name: "r1.atr", Data: files.Annotations}}}
	a, err := ecg.Intake(loose, intakeOptions())
	if err != nil {
		t.Fatal(err)
	}
	if a.Signal.Format != "wfdb" || a.Signal.Waveform.Label != "MLII" || len(a.Signal.Beats) != len(syn.RTimes) {
		t.Fatalf("format %s lead %q beats %d (want %d)", a.Signal.Format, a.Signal.Waveform.Label, len(a.Signal.Beats), len(syn.RTimes))
	}
	var zb bytes.Buffer
	zw := zip.NewWriter(&zb)
	for name, data := range map[string][]byte{"rec/r1.hea": files.Header, "rec/r1.dat": files.Signal, "rec/r1.atr": files.Annotations} {
		f, _ := zw.Create(name)
		f.Write(data)
	}
	zw.Close()
	z, err := ecg.Intake(ecg.RecordingInput{File: zb.Bytes(), FileName: "r1.zip", TakenAt: taken}, intakeOptions())
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(z.Signal.FileSHA256, a.Signal.FileSHA256) || len(z.Signal.Beats) != len(a.Signal.Beats) {
		t.Errorf("zipped: digest %x beats %d; loose: %x, %d", z.Signal.FileSHA256, len(z.Signal.Beats), a.Signal.FileSHA256, len(a.Signal.Beats))
	}
	// Without the signal file: refused, naming the file the header wants.
	_, err = ecg.Intake(ecg.RecordingInput{File: files.Header, FileName: "r1.hea", TakenAt: taken}, intakeOptions())
	if msg := fields(t, err)["waveform"]; !strings.Contains(msg, `"r1.dat"`) {
		t.Errorf("header alone: %q", msg)
	}
	// Two files that are no WFDB record: refused.
	_, err = ecg.Intake(ecg.RecordingInput{File: ecgtest.EncodeCSV(syn.Waveform), FileName: "a.csv", TakenAt: taken,
		More: []ecg.File{{Name: "b.csv", Data: ecgtest.EncodeCSV(syn.Waveform)}}}, intakeOptions())
	if msg := fields(t, err)["waveform"]; !strings.Contains(msg, "WFDB record") {
		t.Errorf("two CSV files: %q", msg)
	}
}

// A file whose signals carry no ECG label (a voltage channel named only by
// its number) still goes through: its first voltage signal is analysed, and
// the warning says so and asks the reader to check the strip. The motion
// channel before it is never taken.
func TestIntakeWarnsWhenNoSignalIsLabelledECG(t *testing.T) {
	const rate = 250.0
	syn := mustSynth(t, ecgtest.SinusRR(40, 800, 11), ecg.SynthOptions{RateHz: rate, Seed: 11})
	n := len(syn.Waveform.Samples)
	b, err := ecgtest.EncodeEDFChannels([]ecgtest.EDFChannel{motionChannel(n, rate, "Accel X"), ecgtest.ECGChannel(syn.Waveform, "Chan 2", "uV")},
		time.Time{}, ecgtest.EDFWriteOptions{})
	if err != nil {
		t.Fatal(err)
	}
	acc, err := ecg.Intake(ecg.RecordingInput{File: b, TakenAt: intakeNow.Add(-time.Hour)}, intakeOptions())
	if err != nil {
		t.Fatal(err)
	}
	sig := acc.Signal
	if sig == nil || sig.Waveform.Label != "Chan 2" {
		t.Fatalf("analysed %+v, want the voltage signal Chan 2", sig)
	}
	if len(sig.Beats) != len(syn.RTimes) {
		t.Errorf("%d beats, want %d", len(sig.Beats), len(syn.RTimes))
	}
	warned := false
	for _, w := range sig.Hint.Warnings {
		if strings.Contains(w, `"Chan 2"`) && strings.Contains(w, "is taken as the ECG") && strings.Contains(w, "check the strip") {
			warned = true
		}
	}
	if !warned {
		t.Errorf("warnings %q do not say which signal was taken as the ECG", sig.Hint.Warnings)
	}
}
