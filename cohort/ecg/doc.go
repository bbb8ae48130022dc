// Package ecg reads ECG recordings, finds the ECG leads and the beats in them
// and lays them out on ECG paper, so that an over-reader can look at a strip
// beside the beat-interval figures computed from it.
//
// Everything here is pure: callers pass bytes in and get values back; nothing
// reads files, the clock or the network, and nothing logs.
//
// # The ECG, briefly
//
// An electrocardiogram (ECG) records the heart's electrical activity as a
// voltage over time. A handheld recorder takes one lead (one view of that
// activity) for 30 seconds or so, sampled a few hundred times a second. Each
// beat draws a small P wave (the atria), a tall narrow QRS complex whose peak
// is the R wave (the ventricles), and a T wave. In atrial fibrillation the P
// waves vanish into a ragged baseline and the R waves come at irregular,
// unrelated intervals; in atrial flutter the atria beat fast and regularly and
// the ventricles follow every second or third beat. The over-reader judges the
// strip; this package prepares it (reads and checks the file, finds the R
// waves, draws the strip on ECG paper) and computes the beat intervals as a
// hint.
//
// # Intake
//
// Intake is the one entry point for a recording that reaches the study: it
// recognises the file (or the files of a WFDB record, loose or zipped) by
// content (fileFormats lists the formats), reads every signal, finds the ECG
// leads (Classify, ChooseLead), takes each through Analyse, and settles the
// recording's times, length, usable length and automatic interpretation. It
// refuses with field messages that say what is wrong and where; the store
// only records what it accepts.
//
// # Inputs
//
// ReadEDF reads EDF and EDF+ files (Kemp B et al. 1992; EDF+ 2003). The local
// patient and recording identification fields of an EDF header often carry a
// name, a birth date or a hospital code, so they come back in their own struct
// (EDFIdentity) and never in the Waveform; callers that store or show a strip
// should drop them or pass them to the de-identification step. The start date
// and time are dates under HIPAA Safe Harbor as well; Waveform.Start carries
// them, so the same care applies.
//
// ReadCSV reads our own plain-text format (see ReadCSVSignals for the
// grammar), with one signal or several named columns.
//
// ReadWFDB reads WFDB records (a header and signal files in formats 16 and
// 212) and ReadAnnotations their annotation files, the open format of the
// physiological signal databases.
//
// Every reader lists all signals of a file (SignalInfo) and returns the ECG
// leads among them: a label naming an ECG or a lead, in a unit of voltage
// (Classify). Motion, marker and other channels are listed, never analysed;
// a file without an ECG is refused with the list of what it holds.
//
// # Checks
//
// CheckRecording refuses sampling rates outside 100-2000 Hz (our bounds: below
// 100 Hz the QRS is too coarsely sampled for beat timing, above 2000 Hz the
// data are unlike a single-lead screening recorder) and marks recordings shorter
// than 30 s as too short for a diagnosis (2020 ESC AF guidelines: AF is
// diagnosed on a single-lead tracing of at least 30 s; verified, secondary).
//
// # Signal quality
//
// AssessQuality marks the stretches beat detection cannot use: lead off,
// saturation at the digital limits, flat line, excessive noise, and a QRS
// band gone quiet for 2 s or more while the trace goes on, which a lost
// electrode and a pause of the heart both give: it is marked as either
// ("no beat found") and the recording page says where, since a pause is a
// finding for the reader (quality.go names each method and its source).
// They are shaded on the strip (Mark), left out of detection and of the
// hint, and their length comes off the usable length, which the 30 s rule
// counts.
//
// # Beats
//
// Detect implements the QRS detector of Pan J, Tompkins WJ. A real-time QRS
// detection algorithm. IEEE Trans Biomed Eng 1985;32(3):230-6, run offline at
// 200 samples/s, and refines every beat to the R peak of the original signal.
// Analyse runs it on every usable stretch on its own.
//
// # Premature beats
//
// FindPremature finds beats that come early and either differ from the
// dominant QRS shape or are followed by a compensatory pause in a regular
// rhythm (ectopic.go); the intervals around them are left out of the hint,
// as interval methods for AF do.
//
// # Checking the detector
//
// EvaluateRecord compares the beats of a WFDB record with its reference
// annotations (MatchBeats, in the manner of ANSI/AAMI EC57); the ecg-check
// command runs it over a folder of records.
//
// # Strips
//
// Layout places a waveform on standard ECG paper (25 mm/s, 10 mm/mV, 1 mm and
// 5 mm squares; common practice, Kligfield P et al. Circulation 2007, from
// memory) in rows of 10 s, and PathD turns a row into SVG path data.
//
// # Hints
//
// Hint scores an RR series with package cohortdesk/cohort/rr. The hint of a
// recording reads the intervals between normal beats as irregularly
// irregular and AF-like, AF-like in part, irregular from premature beats
// and not AF-like, or not AF-like (HintPattern). It is a hint for the
// over-reader, never a verdict.
//
// # Test signals
//
// Synthesize generates ECG from the dynamical model of McSharry PE, Clifford GD,
// Tarassenko L, Smith LA. IEEE Trans Biomed Eng 2003;50(3):289-94, with the RR
// intervals as input, so the true R-peak times are known; the demo uses it.
// SynthOptions.BeatWaves gives single beats a shape of their own (premature
// ventricular beats). Package ecgtest holds what only tests use: EDF (one
// or several signals), CSV and WFDB writers, synthetic RR series of sinus
// rhythm, atrial fibrillation and premature-beat patterns, and artefacts to
// inject.
package ecg
