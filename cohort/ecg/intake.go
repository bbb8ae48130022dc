package ecg

import (
	"crypto/sha256"
	"fmt"
	"math"
	"strings"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/overread"
	"cohortdesk/cohort/rr"
)

// Limits of recording intake (ours): a handheld recorder takes 30 s to a few
// minutes, so a file beyond these is not what the study collects, and the
// bounds keep one upload from filling the database.
const (
	MaxFileBytes        = 32 << 20
	MaxRecordingSeconds = 15 * 60
	// maxFileNameBytes is the longest file name kept.
	maxFileNameBytes = 255
	// clockSkew is how far in the future a recording time may lie: clocks of
	// recorders and staff computers drift a little.
	clockSkew = 5 * time.Minute
)

// RecordingInput is a handheld ECG recording as intake receives it: from the
// coordinators' form, or from a loader that has samples in hand. Give either
// File or Samples, or neither (a recording known only by its metadata).
type RecordingInput struct {
	// TakenAt is when the participant made the recording. Zero takes the
	// waveform's own start time, when the file gives one.
	TakenAt time.Time
	// ReceivedAt is when the recording reached the study; zero is now.
	ReceivedAt time.Time
	// DurationS is the length in seconds of a recording without a waveform;
	// with a waveform, the waveform's own length is used and this is ignored.
	DurationS float64
	// Auto is the recorder's own interpretation; "" is overread.AutoNone.
	Auto overread.Auto
	// File is an uploaded EDF, EDF+ or CSV waveform, recognised by its
	// content. Its patient and recording identification fields are dropped.
	File     []byte
	FileName string
	// CSVRateHz is the sampling rate of a CSV file that does not state one.
	CSVRateHz float64
	// Samples (mV) at RateHz, for loaders that synthesise or convert a
	// waveform themselves.
	Samples []float64
	RateHz  float64
}

// IntakeOptions is what intake needs to know beside the input.
type IntakeOptions struct {
	// Now is the time of intake: recording times after it (beyond a few
	// minutes of clock drift) are refused.
	Now time.Time
	// StudyZone is the zone in which days are compared (the study's).
	StudyZone *time.Location
	// RecorderZone is the participant's zone: an EDF file keeps its start as
	// a local clock time without a zone.
	RecorderZone *time.Location
	// FlaggedAt is when the case was flagged: no recording taken on an
	// earlier day belongs to it.
	FlaggedAt time.Time
	// HintParams are the beat-interval parameters the hint scores with: the
	// protocol's that opened the case, so the hint speaks the screen's language.
	HintParams rr.Params
}

// Accepted is a recording intake accepted, ready to store as it is.
type Accepted struct {
	TakenAt    time.Time
	ReceivedAt time.Time
	// DurationS is kept to the millisecond, so the stored value and the 30 s
	// rule agree exactly.
	DurationS float64
	// TooShort: under MinDiagnosticSeconds, not enough for a diagnostic read.
	TooShort bool
	Auto     overread.Auto
	FileName string // trimmed, at most 255 bytes; may identify someone
	// Signal is the analysed waveform; nil for a recording known only by its
	// metadata.
	Signal *Signal
}

// Signal is the analysed waveform of an accepted recording.
type Signal struct {
	// Waveform holds the samples at the resolution they are stored at
	// (Microvolts), so the beats below are those a detection on the stored
	// recording finds. Its Start is the file's, when it gives one.
	Waveform Waveform
	Format   string // "edf", "edf+", "csv" or "samples"
	// FileSHA256 is the digest of the uploaded file; nil for samples.
	FileSHA256 []byte
	Beats      []int // R-peak sample indices
	Hint       RecordingHint
}

// Intake is the one entry point for recordings: it recognises and reads the
// file (or takes the samples), checks the recording, detects the beats,
// computes the beat-interval hint, and settles the recording's times, length
// and automatic interpretation. It is all or nothing: every problem is
// reported at once in a *cohort.ValidationError, field by field (waveform,
// taken_at, received_on, duration_s, auto), saying what is wrong and where (the
// byte offset and field of an EDF header, the line of a CSV file).
//
// A new file format plugs in at fileFormats; a new step of analysis (a signal
// quality check, say) at analyse.
func Intake(in RecordingInput, o IntakeOptions) (Accepted, error) {
	var ve cohort.ValidationError
	a := Accepted{FileName: strings.TrimSpace(in.FileName)}
	if len(a.FileName) > maxFileNameBytes {
		a.FileName = strings.ToValidUTF8(a.FileName[:maxFileNameBytes], "")
	}
	a.Auto = in.Auto
	if a.Auto == "" {
		a.Auto = overread.AutoNone
	}
	if !a.Auto.Valid() {
		ve.Add("auto", "choose one of the listed interpretations")
	}
	sig, msg := readSignal(in, o)
	if msg != "" {
		ve.Add("waveform", msg+nothingStored)
	}
	a.Signal = sig

	studyZone := zoneOr(o.StudyZone)
	day := func(t time.Time) cohort.Date { return cohort.DateOf(t.In(studyZone)) }
	a.TakenAt = in.TakenAt
	if a.TakenAt.IsZero() && sig != nil {
		a.TakenAt = sig.Waveform.Start
	}
	switch {
	case a.TakenAt.IsZero():
		ve.Add("taken_at", "enter when the recording was taken (the file does not say)")
	case a.TakenAt.After(o.Now.Add(clockSkew)):
		ve.Add("taken_at", "the recording time is in the future")
	case day(a.TakenAt).Before(day(o.FlaggedAt)):
		ve.Add("taken_at", "the recording was taken before the case was flagged ("+day(o.FlaggedAt).Label()+")")
	}
	a.ReceivedAt = in.ReceivedAt
	if a.ReceivedAt.IsZero() {
		a.ReceivedAt = o.Now
	}
	switch {
	case a.ReceivedAt.After(o.Now.Add(clockSkew)):
		ve.Add("received_on", "the day of arrival is in the future")
	case !a.TakenAt.IsZero() && day(a.ReceivedAt).Before(day(a.TakenAt)):
		ve.Add("received_on", "the recording arrived before it was taken")
	case a.ReceivedAt.Before(a.TakenAt):
		a.ReceivedAt = a.TakenAt // same day, earlier hour: keep the order of events
	}
	a.DurationS = roundSeconds(in.DurationS)
	if sig != nil {
		a.DurationS = roundSeconds(sig.Waveform.Seconds())
	} else if !(a.DurationS > 0 && a.DurationS <= MaxRecordingSeconds) {
		ve.Add("duration_s", fmt.Sprintf("enter the duration in seconds (more than 0, at most %d), or upload the waveform", MaxRecordingSeconds))
	}
	a.TooShort = a.DurationS < MinDiagnosticSeconds
	if err := ve.Err(); err != nil {
		return Accepted{}, err
	}
	return a, nil
}

// nothingStored ends every refusal of a waveform.
const nothingStored = " Nothing was stored."

// fileFormat reads one kind of recording file.
type fileFormat struct {
	// sniff recognises the format by the file's content.
	sniff func([]byte) bool
	// read returns the waveform with the format's stored name and warnings.
	read func(data []byte, in RecordingInput, o IntakeOptions) (w Waveform, format string, warnings []string, err error)
	// refusal begins the message of a file the reader refuses; prefix is
	// the reader's own error prefix, left out of the message.
	refusal, prefix string
}

// fileFormats are the formats intake reads, tried in order: a file is read
// by the first whose sniff accepts it. CSV, which has no signature, comes
// last and takes the rest.
var fileFormats = []fileFormat{
	{sniff: isEDF, read: readEDFFile, refusal: "the file is not usable EDF: ", prefix: "ecg: edf: "},
	{sniff: func([]byte) bool { return true }, read: readCSVFile,
		refusal: "the file is neither EDF nor a usable waveform CSV: ", prefix: "ecg: csv: "},
}

// isEDF recognises an EDF or EDF+ file by its version field: "0" and seven
// spaces (EDF specification, header byte 0).
func isEDF(b []byte) bool { return len(b) >= 8 && string(b[:8]) == "0       " }

func readEDFFile(data []byte, _ RecordingInput, o IntakeOptions) (Waveform, string, []string, error) {
	f, err := ReadEDF(data, EDFOptions{Location: o.RecorderZone})
	if err != nil {
		return Waveform{}, "", nil, err
	}
	// f.Identity (patient and recording identification) is PHI and is
	// dropped here, never stored nor shown.
	format := "edf"
	if strings.HasPrefix(f.Header.Variant, "EDF+") {
		format = "edf+"
	}
	return f.Waveform, format, f.Header.Warnings, nil
}

func readCSVFile(data []byte, in RecordingInput, _ IntakeOptions) (Waveform, string, []string, error) {
	w, err := ReadCSV(data, CSVOptions{RateHz: in.CSVRateHz})
	return w, "csv", nil, err
}

// readSignal reads and analyses the waveform of in, if any: nil without one.
// A refusal comes back as the message for the waveform field.
func readSignal(in RecordingInput, o IntakeOptions) (*Signal, string) {
	switch {
	case len(in.File) > 0 && len(in.Samples) > 0:
		return nil, "give either a file or samples, not both."
	case len(in.File) > 0:
		if len(in.File) > MaxFileBytes {
			return nil, fmt.Sprintf("the file is larger than %d MiB, more than any handheld recording.", MaxFileBytes>>20)
		}
		for _, f := range fileFormats {
			if !f.sniff(in.File) {
				continue
			}
			w, format, warnings, err := f.read(in.File, in, o)
			if err != nil {
				return nil, f.refusal + strings.TrimPrefix(err.Error(), f.prefix) + "."
			}
			sum := sha256.Sum256(in.File)
			return analyse(Signal{Waveform: w, Format: format, FileSHA256: sum[:]}, warnings, o.HintParams)
		}
		return nil, "the file's format is not recognised."
	case len(in.Samples) > 0:
		w := Waveform{Samples: in.Samples, RateHz: in.RateHz, Source: fmt.Sprintf("samples given directly, %g Hz, mV", in.RateHz)}
		return analyse(Signal{Waveform: w, Format: "samples"}, nil, o.HintParams)
	}
	return nil, ""
}

// analyse takes a waveform read from any source through the steps of intake:
// the checks of CheckRecording, the length limit, the stored resolution, beat
// detection and the hint. A refusal comes back as a message.
func analyse(s Signal, warnings []string, p rr.Params) (*Signal, string) {
	if _, err := CheckRecording(s.Waveform); err != nil {
		return nil, "the recording cannot be analysed: " + strings.TrimPrefix(err.Error(), "ecg: ") + "."
	}
	if sec := s.Waveform.Seconds(); sec > MaxRecordingSeconds {
		return nil, fmt.Sprintf("the recording lasts %.0f s, longer than the %d s a handheld recording can take here.", sec, MaxRecordingSeconds)
	}
	stored := make([]float64, len(s.Waveform.Samples))
	for i, v := range s.Waveform.Samples {
		stored[i] = float64(Microvolts(v)) / 1000
	}
	s.Waveform.Samples = stored
	det, err := Detect(s.Waveform)
	if err != nil {
		return nil, "beat detection failed: " + strings.TrimPrefix(err.Error(), "ecg: ") + "."
	}
	s.Beats = det.Beats
	s.Hint = RecordingHint{Text: HintText(det.RRms, p), Summary: Hint(det.RRms, p), Params: p,
		Beats: len(det.Beats), MeanHR: det.MeanHR, SearchBack: det.SearchBack, Warnings: warnings}
	return &s, ""
}

// Microvolts is a sample (mV) at the resolution recordings are kept at: whole
// microvolts, clipped to +-32.767 mV (the range of int16). A handheld
// recorder's resolution is a few microvolts, so nothing a reader can see is
// lost.
func Microvolts(mv float64) int16 {
	return int16(max(math.MinInt16, min(math.MaxInt16, math.Round(mv*1000))))
}

// roundSeconds keeps durations to the millisecond.
func roundSeconds(s float64) float64 { return math.Round(s*1000) / 1000 }

func zoneOr(loc *time.Location) *time.Location {
	if loc == nil {
		return time.UTC
	}
	return loc
}
