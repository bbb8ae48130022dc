package overread

import (
	"fmt"
	"strings"

	"cohortdesk/cohort"
)

// Rhythm is a clinician's rhythm verdict. The string value is stored.
type Rhythm string

// The over-read verdicts.
const (
	AF              Rhythm = "af"
	Flutter         Rhythm = "flutter"
	Sinus           Rhythm = "sinus"
	Other           Rhythm = "other"
	Uninterpretable Rhythm = "uninterpretable"
)

var rhythmLabels = cohort.Words[Rhythm]{
	AF:              "atrial fibrillation",
	Flutter:         "atrial flutter",
	Sinus:           "sinus rhythm",
	Other:           "other arrhythmia",
	Uninterpretable: "uninterpretable",
}

// Rhythms lists the verdicts in the order the form offers them.
func Rhythms() []Rhythm { return []Rhythm{AF, Flutter, Sinus, Other, Uninterpretable} }

// Valid reports whether r is a defined verdict.
func (r Rhythm) Valid() bool { return rhythmLabels.Valid(r) }

// Label is the wording on pages; unknown values are shown quoted.
func (r Rhythm) Label() string { return rhythmLabels.Label(r) }

// Interpretable reports whether the verdict names a rhythm. Only an
// interpretable verdict moves a case on to "over-read"; an uninterpretable one
// leaves it waiting for a repeat recording.
func (r Rhythm) Interpretable() bool { return r.Valid() && r != Uninterpretable }

// Confidence is how sure the reader is. The string value is stored.
type Confidence string

// The confidence levels.
const (
	Certain   Confidence = "certain"
	Probable  Confidence = "probable"
	Uncertain Confidence = "uncertain"
)

// Confidences lists the levels in the order the form offers them.
func Confidences() []Confidence { return []Confidence{Certain, Probable, Uncertain} }

// Valid reports whether c is a defined level.
func (c Confidence) Valid() bool { return c == Certain || c == Probable || c == Uncertain }

// Label is the wording on pages.
func (c Confidence) Label() string { return string(c) }

// Auto is the recorder's own reading of its recording: the device's call,
// never a diagnosis. The string value is stored; the words are ours and say
// plainly that the device made the call.
type Auto string

// The recorder's own readings. AutoNoReading: the recorder gave none (or the
// study does not record it); AutoNotAnalysed: the recorder said the trace was
// too short or too noisy to analyse.
const (
	AutoNoReading       Auto = "no_reading"
	AutoSuggestsAF      Auto = "suggests_af"
	AutoSuggestsRegular Auto = "suggests_regular"
	AutoNoCall          Auto = "no_call"
	AutoNotAnalysed     Auto = "not_analysed"
)

var autoLabels = cohort.Words[Auto]{
	AutoNoReading:       "no device reading",
	AutoSuggestsAF:      "device suggests AF",
	AutoSuggestsRegular: "device suggests a regular rhythm",
	AutoNoCall:          "device made no rhythm call",
	AutoNotAnalysed:     "device could not analyse the trace",
}

// AutoHeading names the recorder's own reading wherever it is shown (form
// fields, table columns, summaries).
const AutoHeading = "Recorder's own reading"

// Autos lists the recorder's readings in the order the form offers them.
func Autos() []Auto {
	return []Auto{AutoNoReading, AutoSuggestsAF, AutoSuggestsRegular, AutoNoCall, AutoNotAnalysed}
}

// Valid reports whether a is a defined reading of the recorder.
func (a Auto) Valid() bool { return autoLabels.Valid(a) }

// Label is the wording on pages, files and summaries.
func (a Auto) Label() string { return autoLabels.Label(a) }

// Role is the place of a reading in the double-reading scheme. The string
// value is stored.
type Role string

// The reading roles.
const (
	First        Role = "first"
	Second       Role = "second"
	Adjudication Role = "adjudication"
)

var roleLabels = cohort.Words[Role]{
	First:        "first reading",
	Second:       "second reading",
	Adjudication: "adjudication",
}

// Label is the wording on pages; unknown values are shown quoted.
func (r Role) Label() string { return roleLabels.Label(r) }

// ReaderLabel words who gave a reading of this role, as a referral summary
// names the reader of its verdict.
func (r Role) ReaderLabel() string {
	switch r {
	case First:
		return "first reader"
	case Second:
		return "second reader"
	case Adjudication:
		return "adjudication (the first two readers disagreed)"
	}
	return r.Label()
}

// Reading is one entered over-read.
type Reading struct {
	Role       Role
	Rhythm     Rhythm
	Confidence Confidence
	ReaderID   int64
	Reader     string
	On         cohort.Date // the day of the reading
}

// Status says where a recording's readings stand.
type Status string

// The reading statuses.
const (
	Unread      Status = "unread"      // no reading yet
	Single      Status = "single"      // one reading; it is the verdict (a second reading is optional)
	Agreed      Status = "agreed"      // two readers gave the same rhythm
	Disagreed   Status = "disagreed"   // two readers differ and nobody has adjudicated yet
	Adjudicated Status = "adjudicated" // the readers differed and an adjudication settled it
)

// Label is the wording on pages.
func (s Status) Label() string {
	switch s {
	case Unread:
		return "waiting for an over-read"
	case Single:
		return "read once"
	case Agreed:
		return "two readers agree"
	case Disagreed:
		return "readers disagree: waiting for adjudication"
	case Adjudicated:
		return "adjudicated"
	}
	return string(s)
}

// Conclusion is the effective conclusion of a recording's readings.
type Conclusion struct {
	Status Status
	// Final is true when the readings settle a rhythm: one reading, two that
	// agree, or an adjudication. Rhythm and SettledOn are set only then.
	Final     bool
	Rhythm    Rhythm
	SettledOn cohort.Date // the day of the latest reading the conclusion rests on
	// ConfidenceDiffers marks two agreeing readers who differ in confidence,
	// which the page highlights without asking for adjudication.
	ConfidenceDiffers bool
}

// Diagnostic is the one rule for a diagnostic recording: its readings settle
// an interpretable rhythm and the recording is long enough for a diagnostic
// read (tooShort: under the 30 s a single-lead diagnosis needs). It is what
// moves a case to "over-read" and what the figures count as an over-read.
func (v Conclusion) Diagnostic(tooShort bool) bool {
	return v.Final && v.Rhythm.Interpretable() && !tooShort
}

// ConfirmsAF is the one rule for a confirmed AF: a diagnostic recording
// (Diagnostic) whose readings settle on atrial fibrillation. Two readers who
// disagree settle nothing until an adjudication, so a disputed AF reading
// confirms nothing. It is what makes a case ready to refer, what a referral's
// sign-off requires, and what the figures count as AF confirmed.
func (v Conclusion) ConfirmsAF(tooShort bool) bool {
	return v.Diagnostic(tooShort) && v.Rhythm == AF
}

// byRole picks the readings apart and checks there is at most one of each.
func byRole(rs []Reading) (first, second, adj *Reading, err error) {
	for i := range rs {
		r := &rs[i]
		var slot **Reading
		switch r.Role {
		case First:
			slot = &first
		case Second:
			slot = &second
		case Adjudication:
			slot = &adj
		default:
			return nil, nil, nil, fmt.Errorf("overread: reading %d has unknown role %q", i+1, r.Role)
		}
		if *slot != nil {
			return nil, nil, nil, fmt.Errorf("overread: two readings in the role %s", r.Role)
		}
		*slot = r
	}
	return first, second, adj, nil
}

func later(a, b cohort.Date) cohort.Date {
	if a.Before(b) {
		return b
	}
	return a
}

// Resolve gives the effective conclusion of a recording's readings: the
// adjudication when there is one, else the agreed rhythm of two readers, else
// the single reading. Two readers who give different rhythms leave the
// recording without a verdict until an adjudication is entered. Readings that
// could not have been entered under Check (a second without a first, an
// adjudication without a disagreement) are an error.
func Resolve(rs []Reading) (Conclusion, error) {
	first, second, adj, err := byRole(rs)
	if err != nil {
		return Conclusion{}, err
	}
	switch {
	case first == nil && (second != nil || adj != nil):
		return Conclusion{}, fmt.Errorf("overread: a later reading without a first reading")
	case first == nil:
		return Conclusion{Status: Unread}, nil
	case second == nil && adj != nil:
		return Conclusion{}, fmt.Errorf("overread: an adjudication without a second reading")
	case second == nil:
		return Conclusion{Status: Single, Final: true, Rhythm: first.Rhythm, SettledOn: first.On}, nil
	case first.Rhythm == second.Rhythm:
		if adj != nil {
			return Conclusion{}, fmt.Errorf("overread: an adjudication of readers who agree")
		}
		return Conclusion{Status: Agreed, Final: true, Rhythm: first.Rhythm, SettledOn: later(first.On, second.On),
			ConfidenceDiffers: first.Confidence != second.Confidence}, nil
	case adj == nil:
		return Conclusion{Status: Disagreed}, nil
	}
	return Conclusion{Status: Adjudicated, Final: true, Rhythm: adj.Rhythm, SettledOn: adj.On}, nil
}

// Next says which reading a recording can take now, given those entered:
// First when there is none; Second when only a first exists (optional);
// Adjudication when two readers disagree; "" when nothing more can be entered.
func Next(rs []Reading) Role {
	first, second, adj, err := byRole(rs)
	switch {
	case err != nil:
		return ""
	case first == nil:
		return First
	case second == nil:
		return Second
	case first.Rhythm != second.Rhythm && adj == nil:
		return Adjudication
	}
	return ""
}

// Check says whether next may be added to the readings entered so far. The
// rules: readings come in the order first, second, adjudication; each role
// once; the second reader is another person than the first (a second reading
// by the same person is not independent); an adjudication only settles a
// disagreement. The adjudicator may be one of the two readers (a consensus
// after discussion); the page says so when it happens. A refusal is a
// *cohort.ValidationError on the field "role" or "reader".
func Check(existing []Reading, next Reading) error {
	want := Next(existing)
	first, _, _, err := byRole(existing)
	if err != nil {
		return err
	}
	var ve cohort.ValidationError
	switch {
	case !next.Rhythm.Valid():
		ve.Add("rhythm", chooseRhythm)
	}
	switch {
	case want == "":
		ve.Add("role", "this recording's readings are complete; nothing more can be entered")
	case next.Role != want:
		ve.Add("role", fmt.Sprintf("the next entry for this recording is the %s, not the %s", want.Label(), next.Role.Label()))
	case next.Role == Second && first != nil && next.ReaderID != 0 && next.ReaderID == first.ReaderID:
		ve.Add("reader", "the second reading must come from another investigator than the first")
	}
	return ve.Err()
}

// Category is one class of the common category set in which the recorder's
// own reading and the over-read are compared (Cohen's kappa). The recorder
// knows fewer rhythms than a clinician, so the over-read's atrial flutter and
// other arrhythmia fall together with the recorder's "no rhythm call". The
// mapping is ours.
type Category string

// The common categories.
const (
	CatAF            Category = "AF"
	CatRegular       Category = "sinus or regular rhythm"
	CatOther         Category = "another rhythm or no call"
	CatNotAnalysable Category = "not analysable"
)

// Categories lists the common categories in table order.
func Categories() []Category { return []Category{CatAF, CatRegular, CatOther, CatNotAnalysable} }

// AutoCategory maps a recorder's reading to the common categories; ok is
// false for AutoNoReading (nothing to compare) and unknown values.
func AutoCategory(a Auto) (c Category, ok bool) {
	switch a {
	case AutoSuggestsAF:
		return CatAF, true
	case AutoSuggestsRegular:
		return CatRegular, true
	case AutoNoCall:
		return CatOther, true
	case AutoNotAnalysed:
		return CatNotAnalysable, true
	}
	return "", false
}

// RhythmCategory maps an over-read verdict to the common categories; ok is
// false for unknown values.
func RhythmCategory(r Rhythm) (c Category, ok bool) {
	switch r {
	case AF:
		return CatAF, true
	case Sinus:
		return CatRegular, true
	case Flutter, Other:
		return CatOther, true
	case Uninterpretable:
		return CatNotAnalysable, true
	}
	return "", false
}

// CategoryMapping describes the mapping in words, for the statistics page and
// the weekly report, from the labels of both sides.
var CategoryMapping = categoryMapping()

func categoryMapping() string {
	var b strings.Builder
	b.WriteString("Categories compared: ")
	for i, c := range Categories() {
		var autos, rhythms []string
		for _, a := range Autos() {
			if ac, ok := AutoCategory(a); ok && ac == c {
				autos = append(autos, a.Label())
			}
		}
		for _, r := range Rhythms() {
			if rc, ok := RhythmCategory(r); ok && rc == c {
				rhythms = append(rhythms, r.Label())
			}
		}
		if i > 0 {
			b.WriteString("; ")
		}
		fmt.Fprintf(&b, "%s (recorder: %s; reader: %s)", c, strings.Join(autos, " or "), strings.Join(rhythms, " or "))
	}
	fmt.Fprintf(&b, ". Recordings with %s are left out.", AutoNoReading.Label())
	return b.String()
}

// Awaits is the one rule for a recording waiting for an over-read: it has
// no current reading, its case is still being worked (a case that ended
// needs no more reads; its recordings leave the queue), and nobody marked
// it as needing none (a repeat replaced it, say). Every page and file that
// counts recordings waiting for an over-read counts these; the store
// applies the rule in SQL (db.awaitingRead), and a test holds the two
// together.
func Awaits(c Conclusion, caseEnded, notNeeded bool) bool {
	return c.Status == Unread && !caseEnded && !notNeeded
}
