package ecg

import (
	"fmt"
	"math"
	"slices"
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
	// Auto is the recorder's own reading; "" is overread.AutoNoReading.
	Auto overread.Auto
	// File is an uploaded EDF, EDF+, CSV or zip file, or a WFDB header,
	// recognised by its content. The patient and recording identification
	// fields of an EDF header are dropped.
	File     []byte
	FileName string
	// More holds the other files of an upload of several: a WFDB record's
	// header and signal files come together (in any order, File included).
	More []File
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
	// UsableS is the length of the waveform that the quality check left
	// usable (the duration without a waveform); kept to the millisecond.
	UsableS float64
	// TooShort: under MinDiagnosticSeconds usable, not enough for a
	// diagnostic read, whether the recording is short or its artefacts are
	// long.
	TooShort bool
	Auto     overread.Auto
	FileName string // trimmed, at most 255 bytes; may identify someone
	// Signal is the analysed waveform; nil for a recording known only by its
	// metadata.
	Signal *Signal
}

// Signal is the analysed waveform of an accepted recording: the lead
// analysed first, with the file's other leads and its list of signals.
type Signal struct {
	// Analysis is the lead shown and scored: its samples at the stored
	// resolution (Microvolts), so the beats are those a detection on the
	// stored recording finds, its beats and its hint (with the quality
	// check and the premature beats). Its Start is the file's, when it
	// gives one.
	Analysis
	Format string // "edf", "edf+", "csv", "wfdb" or "samples"
	// FileSHA256 is the digest of the uploaded file (of several files, see
	// uploadDigest); nil for samples.
	FileSHA256 []byte
	// Signals lists every signal the file holds, the ECG leads and the
	// others (motion, markers, ...); nil for samples.
	Signals []SignalInfo
	// Leads holds every ECG lead analysed, the one above included, when the
	// file holds more than one; Lead is the index of the one above.
	Leads []Analysis
	Lead  int
}

// Intake is the one entry point for recordings: it recognises and reads the
// file (or takes the samples), checks the recording, detects the beats,
// computes the beat-interval hint, and settles the recording's times, length
// and the recorder's own reading. It is all or nothing: every problem is
// reported at once in a *cohort.ValidationError, field by field (waveform,
// taken_at, received_on, duration_s, auto), saying what is wrong and where (the
// byte offset and field of an EDF header, the line of a CSV file).
//
// A new file format plugs in at fileFormats; a new step of analysis at
// Analyse.
func Intake(in RecordingInput, o IntakeOptions) (Accepted, error) {
	var ve cohort.ValidationError
	a := Accepted{FileName: strings.TrimSpace(in.FileName)}
	if len(a.FileName) > maxFileNameBytes {
		a.FileName = strings.ToValidUTF8(a.FileName[:maxFileNameBytes], "")
	}
	a.Auto = in.Auto
	if a.Auto == "" {
		a.Auto = overread.AutoNoReading
	}
	if !a.Auto.Valid() {
		ve.Add("auto", "choose one of the listed readings of the recorder")
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
	a.UsableS = a.DurationS
	if sig != nil {
		a.DurationS = roundSeconds(sig.Waveform.Seconds())
		a.UsableS = sig.UsableSeconds()
	} else if !(a.DurationS > 0 && a.DurationS <= MaxRecordingSeconds) {
		ve.Add("duration_s", fmt.Sprintf("enter the duration in seconds (more than 0, at most %d), or upload the waveform", MaxRecordingSeconds))
	}
	a.TooShort = TooShort(a.UsableS)
	if err := ve.Err(); err != nil {
		return Accepted{}, err
	}
	return a, nil
}

// nothingStored ends every refusal of a waveform.
const nothingStored = " Nothing was stored."

// UsableSeconds is the usable length of the analysed lead, to the
// millisecond.
func (a Analysis) UsableSeconds() float64 {
	if a.Hint.Quality == nil {
		return roundSeconds(a.Waveform.Seconds())
	}
	return roundSeconds(a.Hint.Quality.UsableSeconds)
}

// fileFormat reads one kind of recording file.
type fileFormat struct {
	// sniff recognises the format by the file's content.
	sniff func([]byte) bool
	// read returns what the file holds with the format's stored name.
	read func(f File, more []File, in RecordingInput, o IntakeOptions) (c Contents, format string, err error)
	// refusal begins the message of a file the reader refuses; prefix is
	// the reader's own error prefix, left out of the message.
	refusal, prefix string
}

// fileFormats are the formats intake reads, tried in order: a file is read
// by the first whose sniff accepts it. A zip file is opened and its files
// read as an upload of several; CSV, which has no signature, comes last and
// takes the rest.
var fileFormats = []fileFormat{
	{sniff: isEDF, read: readEDFFile, refusal: "the file is not usable EDF: ", prefix: "ecg: edf: "},
	{sniff: isWFDBHeader, read: readWFDBFiles, refusal: "the WFDB record is not usable: ", prefix: "ecg: "},
	{sniff: func([]byte) bool { return true }, read: readCSVFile,
		refusal: "the file is neither EDF, WFDB nor a usable waveform CSV: ", prefix: "ecg: csv: "},
}

// isEDF recognises an EDF or EDF+ file by its version field: "0" and seven
// spaces (EDF specification, header byte 0).
func isEDF(b []byte) bool { return len(b) >= 8 && string(b[:8]) == "0       " }

// isWFDBHeader recognises a WFDB header: text whose first line that is not
// a comment reads as a record line, a name and a signal count, followed by
// a signal line naming a file and a format.
func isWFDBHeader(b []byte) bool {
	if len(b) > wfdbMaxHeaderLen || !utf8Text(b) {
		return false
	}
	_, err := ParseWFDBHeader("header", b, nil)
	return err == nil
}

func utf8Text(b []byte) bool {
	for _, c := range b[:min(len(b), 4096)] {
		if c == 0 {
			return false
		}
	}
	return true
}

func readEDFFile(file File, _ []File, _ RecordingInput, o IntakeOptions) (Contents, string, error) {
	f, err := ReadEDF(file.Data, EDFOptions{Location: o.RecorderZone})
	if err != nil {
		return Contents{}, "", err
	}
	// f.Identity (patient and recording identification) is PHI and is
	// dropped here, never stored nor shown.
	format := "edf"
	if strings.HasPrefix(f.Header.Variant, "EDF+") {
		format = "edf+"
	}
	return Contents{Signals: f.Signals, Leads: f.Leads, Chosen: f.ChosenLead, Start: f.Header.Start, Warnings: f.Header.Warnings}, format, nil
}

func readCSVFile(file File, _ []File, in RecordingInput, _ IntakeOptions) (Contents, string, error) {
	c, err := ReadCSVSignals(file.Data, CSVOptions{RateHz: in.CSVRateHz})
	return c, "csv", err
}

func readWFDBFiles(header File, more []File, _ RecordingInput, o IntakeOptions) (Contents, string, error) {
	rec, err := ReadWFDB(header, more, o.RecorderZone)
	return rec.Contents, "wfdb", err
}

// readSignal reads and analyses the waveform of in, if any: nil without one.
// A refusal comes back as the message for the waveform field.
func readSignal(in RecordingInput, o IntakeOptions) (*Signal, string) {
	switch {
	case (len(in.File) > 0 || len(in.More) > 0) && len(in.Samples) > 0:
		return nil, "give either a file or samples, not both."
	case len(in.File) > MaxFileBytes:
		return nil, fmt.Sprintf("the file is larger than %d MiB, more than any handheld recording.", MaxFileBytes>>20)
	case len(in.File) > 0 || len(in.More) > 0:
		files, msg := uploadFiles(in)
		if msg != "" {
			return nil, msg
		}
		main, rest, msg := mainFile(files)
		if msg != "" {
			return nil, msg
		}
		for _, f := range fileFormats {
			if !f.sniff(main.Data) {
				continue
			}
			c, format, err := f.read(main, rest, in, o)
			if err != nil {
				return nil, f.refusal + strings.TrimPrefix(strings.TrimPrefix(err.Error(), f.prefix), "ecg: ") + "."
			}
			return analyseContents(c, format, uploadDigest(files), o.HintParams)
		}
		return nil, "the file's format is not recognised."
	case len(in.Samples) > 0:
		w := Waveform{Samples: in.Samples, RateHz: in.RateHz, Source: fmt.Sprintf("samples given directly, %g Hz, mV", in.RateHz)}
		c := Contents{Leads: []Lead{{Signal: 1, Waveform: w}}}
		return analyseContents(c, "samples", nil, o.HintParams)
	}
	return nil, ""
}

// analyseContents takes every ECG lead of a file through Analyse, after the
// checks of CheckRecording and the length limit. The chosen lead must pass;
// another that cannot be analysed is left out with a warning. A refusal
// comes back as a message.
func analyseContents(c Contents, format string, digest []byte, p rr.Params) (*Signal, string) {
	sig := &Signal{Format: format, FileSHA256: digest, Signals: c.Signals}
	for i, l := range c.Leads {
		w := l.Waveform
		if w.Start.IsZero() {
			w.Start = c.Start
		}
		a, msg := analyseLead(w, l.Limits, p)
		if msg != "" {
			if i == c.Chosen {
				return nil, msg
			}
			c.Warnings = append(c.Warnings, fmt.Sprintf("lead %q was not analysed: %s", w.Label, strings.TrimSuffix(msg, ".")))
			continue
		}
		a.Signal = l.Signal
		if i == c.Chosen {
			sig.Lead = len(sig.Leads)
		}
		sig.Leads = append(sig.Leads, a)
	}
	for i := range sig.Leads {
		h := &sig.Leads[i].Hint
		h.Warnings = append(slices.Clone(c.Warnings), h.Warnings...)
	}
	sig.Analysis = sig.Leads[sig.Lead]
	if len(sig.Leads) == 1 {
		sig.Leads, sig.Lead = nil, 0
	}
	return sig, ""
}

// analyseLead checks one lead and analyses it; a refusal is a message.
func analyseLead(w Waveform, lim Limits, p rr.Params) (Analysis, string) {
	probe := w
	probe.Samples = nil
	for _, v := range w.Samples {
		if !math.IsNaN(v) {
			probe.Samples = []float64{v}
			break
		}
	}
	if len(w.Samples) > 0 && probe.Samples == nil {
		return Analysis{}, "the recording cannot be analysed: every sample is marked missing."
	}
	for i, v := range w.Samples {
		if math.IsInf(v, 0) {
			return Analysis{}, fmt.Sprintf("the recording cannot be analysed: sample %d is %v.", i, v)
		}
	}
	if _, err := CheckRecording(probe); err != nil {
		return Analysis{}, "the recording cannot be analysed: " + strings.TrimPrefix(err.Error(), "ecg: ") + "."
	}
	if sec := w.Seconds(); sec > MaxRecordingSeconds {
		return Analysis{}, fmt.Sprintf("the recording lasts %.0f s, longer than the %d s a handheld recording can take here.", sec, MaxRecordingSeconds)
	}
	a, err := Analyse(w, lim, p)
	if err != nil {
		return Analysis{}, "the recording cannot be analysed: " + strings.TrimPrefix(err.Error(), "ecg: ") + "."
	}
	return a, ""
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
