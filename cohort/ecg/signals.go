package ecg

import (
	"fmt"
	"strings"
	"time"
)

// SignalKind says what a signal of a file records, judged from its label
// and its unit.
type SignalKind string

// The kinds of signal. Stored as text in a recording's list of signals.
const (
	// KindECG is an ECG lead: an ECG label or a lead name, in volts.
	KindECG SignalKind = "ecg"
	// KindUnlabelled is a signal in volts whose label names nothing
	// ("Ch1"): taken as the ECG only when no signal is labelled as one.
	KindUnlabelled SignalKind = "unlabelled"
	// KindMotion is an accelerometer, gyroscope or position signal.
	KindMotion SignalKind = "motion"
	// KindMarker is an event, trigger or status channel.
	KindMarker SignalKind = "marker"
	// KindOther is any other signal (EEG, respiration, oxygen saturation,
	// a signal without a unit).
	KindOther SignalKind = "other"
)

// Label is the kind in words.
func (k SignalKind) Label() string {
	switch k {
	case KindECG:
		return "ECG"
	case KindUnlabelled:
		return "unlabelled, in volts"
	case KindMotion:
		return "motion"
	case KindMarker:
		return "marker"
	}
	return "other"
}

// SignalInfo describes one signal a file holds. The list of them is kept
// with a recording, so a reader sees what else the file held.
type SignalInfo struct {
	Number int        `json:"number"` // 1-based, in file order
	Label  string     `json:"label"`
	Unit   string     `json:"unit"`
	RateHz float64    `json:"rate_hz"`
	Kind   SignalKind `json:"kind"`
}

// String reads like `signal 2 "ECG I" (mV, 500 Hz, ECG)`.
func (s SignalInfo) String() string {
	unit := s.Unit
	if unit == "" {
		unit = "no unit"
	}
	return fmt.Sprintf("signal %d %q (%s, %g Hz, %s)", s.Number, s.Label, unit, s.RateHz, s.Kind.Label())
}

// Lead is one ECG signal of a file, in mV.
type Lead struct {
	// Signal is the lead's number among the file's signals (SignalInfo).
	Signal int
	// Waveform holds the samples; NaN marks a sample the file gives as
	// missing.
	Waveform Waveform
	// Limits are the recorder's digital limits in mV, when the file
	// states them (EDF, WFDB); the quality check looks for saturation there.
	Limits Limits
}

// Contents is what a reader finds in a recording file: every signal, the
// ECG leads among them and the lead to analyse first.
type Contents struct {
	Signals  []SignalInfo
	Leads    []Lead
	Chosen   int       // index into Leads
	Start    time.Time // zero when the file does not say
	Warnings []string
}

// mvPerUnit gives the factor from a unit of voltage to millivolts, in any
// of the spellings files use: nV, uV, µV (written as the Latin-1 micro sign,
// the Greek mu, or either in UTF-8 read as Latin-1), mV, V, and the words
// (microvolt, millivolt, volt, with or without a plural), in any letter
// case. The EDF specification prescribes "uV", "mV" and "V" (Kemp B et al.
// 1992; EDF+ 2003, "standard texts", from memory); the other spellings are
// what files in the wild hold. ok is false for anything else.
func mvPerUnit(unit string) (factor float64, ok bool) {
	u := strings.TrimSpace(unit)
	for _, micro := range []string{"µ", "μ", "Âµ", "Î¼"} {
		if rest, found := strings.CutPrefix(u, micro); found {
			u = "u" + rest
		}
	}
	switch strings.ToLower(u) {
	case "nv", "nanovolt", "nanovolts":
		return 1e-6, true
	case "uv", "microvolt", "microvolts", "mcv":
		return 1e-3, true
	case "mv", "millivolt", "millivolts":
		return 1, true
	case "v", "volt", "volts":
		return 1e3, true
	}
	return 0, false
}

// Words of labels, after normalising (upper case, spaces, dashes, dots and
// underscores removed). Ours, from labels seen in recorder exports and the
// open databases.
var (
	ecgWords    = []string{"ECG", "EKG", "ELECTROCARDIO"}
	motionWords = []string{"ACC", "GYRO", "MOTION", "ACTIVITY", "POSITION", "MAGNET", "ACTIGRAPH", "MOVEMENT", "TILT"}
	markerWords = []string{"MARK", "EVENT", "TRIG", "STATUS", "BUTTON", "ANNOT", "STIM", "DIGITAL", "SYNC"}
	otherWords  = []string{"EEG", "EOG", "EMG", "RESP", "THOR", "ABDO", "SPO2", "SAO2", "PLETH", "PPG", "PULSE",
		"ABP", "CVP", "NIBP", "TEMP", "SOUND", "SNORE", "FLOW", "PRESS", "AIRWAY", "CO2", "SKIN", "GSR", "EDA", "IMPED"}
	// Lead names: the limb and chest leads, their European forms (D1-D3),
	// the modified limb and chest leads of ambulatory and database
	// recordings (MLII, MV1, CM5, ...).
	leadNames = map[string]int{
		"I": 1, "LEADI": 1, "DI": 1, "D1": 1, "MLI": 1,
		"II": 2, "LEADII": 2, "DII": 2, "D2": 2, "MLII": 2, "ML2": 2,
		"III": 3, "LEADIII": 3, "DIII": 3, "D3": 3, "MLIII": 3,
		"AVR": 4, "AVL": 4, "AVF": 4,
		"V1": 4, "V2": 4, "V3": 4, "V4": 4, "V5": 4, "V6": 4, "V": 4,
		"MV1": 4, "MV2": 4, "MV3": 4, "MV4": 4, "MV5": 4, "MV6": 4, "MCL1": 4, "MCL6": 4,
		"CM5": 4, "CC5": 4, "CM2": 4, "CM4": 4, "ML5": 4,
	}
	// Units of motion: acceleration, angular speed, angle.
	motionUnits = []string{"g", "mg", "m/s2", "m/s^2", "m/s²", "deg/s", "dps", "rad/s", "deg", "°", "mm/s2"}
)

func normLabel(s string) string {
	return strings.Map(func(r rune) rune {
		switch r {
		case ' ', '-', '_', '.', '/', ':', '(', ')':
			return -1
		}
		return r
	}, strings.ToUpper(s))
}

func containsAny(s string, words []string) bool {
	for _, w := range words {
		if strings.Contains(s, w) {
			return true
		}
	}
	return false
}

// leadRank orders ECG leads for the first analysis (ours): lead I, the lead
// a handheld recorder takes, first; then a lead the label does not name
// (the recorder's own, "ECG"); then lead II, whose rhythm strips readers
// know best; then any other lead; 0 for a label that names no lead.
func leadRank(label string) int {
	n := normLabel(label)
	for _, w := range ecgWords {
		n = strings.TrimPrefix(n, w)
	}
	n = strings.TrimPrefix(n, "LEAD")
	if r, ok := leadNames[n]; ok {
		switch r {
		case 1:
			return 1
		case 2:
			return 3
		}
		return 4
	}
	if n == "" || len(n) <= 2 && strings.Trim(n, "0123456789") == "" {
		return 2 // "ECG", "ECG1": the recorder's own lead
	}
	return 0
}

// Classify judges a signal by its label and unit. A voltage unit is needed
// for an ECG: a label that names another modality (EEG, respiration,
// motion, markers) wins over the unit; an ECG word or a lead name in volts
// is an ECG; another signal in volts is unlabelled.
func Classify(label, unit string) SignalKind {
	n := normLabel(label)
	_, volts := mvPerUnit(unit)
	isECG := containsAny(n, ecgWords) || leadRank(label) > 0 && leadRank(label) != 2
	switch {
	case containsAny(n, otherWords) && !containsAny(n, ecgWords):
		return KindOther
	case containsAny(n, motionWords) || unitIn(unit, motionUnits):
		return KindMotion
	case containsAny(n, markerWords):
		return KindMarker
	case !volts:
		if strings.TrimSpace(unit) == "" && !isECG {
			return KindMarker
		}
		return KindOther
	case isECG:
		return KindECG
	}
	return KindUnlabelled
}

func unitIn(unit string, set []string) bool {
	u := strings.TrimSpace(unit)
	for _, s := range set {
		if strings.EqualFold(u, s) {
			return true
		}
	}
	return false
}

// ChooseLead picks the lead to analyse first among a file's signals: the
// ECG leads by leadRank, ties in file order; without any ECG-labelled
// signal, the first unlabelled signal in volts (with a warning). It returns
// the signal numbers of the leads to keep (ECG leads, or the unlabelled
// ones when there is no ECG lead) and the index among them of the one to
// analyse first; keep is empty when the file holds no ECG, and refusal
// then lists what it holds.
func ChooseLead(signals []SignalInfo) (keep []int, chosen int, warning string, refusal string) {
	best, bestRank := -1, 99
	for _, s := range signals {
		if s.Kind != KindECG {
			continue
		}
		keep = append(keep, s.Number)
		r := leadRank(s.Label)
		if r == 0 {
			r = 5
		}
		if r < bestRank {
			best, bestRank = len(keep)-1, r
		}
	}
	if len(keep) > 0 {
		return keep, best, "", ""
	}
	for _, s := range signals {
		if s.Kind == KindUnlabelled {
			keep = append(keep, s.Number)
		}
	}
	if len(keep) > 0 {
		s := signals[0]
		for _, x := range signals {
			if x.Number == keep[0] {
				s = x
			}
		}
		return keep, 0, fmt.Sprintf("%s is taken as the ECG: no signal is labelled as one (ECG, EKG or a lead name); check the strip.", s), ""
	}
	var list []string
	for _, s := range signals {
		list = append(list, s.String())
	}
	if len(list) == 0 {
		return nil, 0, "", "the file holds no signal"
	}
	return nil, 0, "", "the file holds no ECG signal (an ECG, EKG or lead-name label with a unit of volts): it holds " + strings.Join(list, "; ")
}
