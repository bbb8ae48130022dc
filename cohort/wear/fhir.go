package wear

import (
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"strings"

	"cohortdesk/cohort"
)

// LOINC codes the FHIR reader turns into readings.
const (
	LOINCHeartRate = "8867-4"  // Heart rate
	LOINCSteps     = "55423-8" // Number of steps in unspecified time, pedometer
)

const (
	systemLOINC = "http://loinc.org"
	systemUCUM  = "http://unitsofmeasure.org"
	// defaultMaxEntryBytes bounds one Bundle entry. An Observation is a few
	// kilobytes even with its narrative; the bound keeps a broken or hostile
	// file from growing the decoder's buffer without limit.
	defaultMaxEntryBytes = 16 << 20
)

// FHIRSubject is an Observation's subject as written, handed to the caller's
// mapping so it can use either the reference or a business identifier.
type FHIRSubject struct {
	Reference        string // e.g. "Patient/p-0042", possibly with a base URL
	IdentifierSystem string // subject.identifier.system, if any
	IdentifierValue  string // subject.identifier.value, if any
}

// FHIROptions adjusts a FHIRReader. The zero value is ready to use.
type FHIROptions struct {
	// MapSubject returns the study ID an Observation belongs to, or false
	// when the subject is not a participant of this study. When nil, a
	// reference "Patient/<id>" (a base URL before it and "/_history/<n>"
	// after it are allowed) maps to "<id>", and anything else is refused.
	MapSubject func(FHIRSubject) (studyID string, ok bool)
	// MaxEntryBytes bounds the JSON text of one Bundle entry; 0 means 16 MiB.
	MaxEntryBytes int
}

// FHIRStats counts what a FHIRReader passed over without making a row or a
// rejection of it, so the import report can still account for every entry.
type FHIRStats struct {
	Entries        int // Bundle entries seen
	Observations   int // entries holding an Observation
	OtherResources int // entries holding another resource type (Patient, Device...) or none
	EnteredInError int // Observations with status entered-in-error, skipped
}

// FHIRReader streams readings out of an HL7 FHIR R4 Bundle in JSON, one entry
// at a time, so memory stays bounded by the largest entry, not the file. See
// the package documentation for what it accepts.
type FHIRReader struct {
	name    string
	opt     FHIROptions
	tr      *trackingReader
	dec     *json.Decoder
	state   int
	rtype   string
	entry   int
	row     Row
	rej     *Rejection
	err     error
	stats   FHIRStats
	ids     interner
	entOff  int64 // byte offset where the current entry starts
	entLine int
}

const (
	stStart = iota
	stKeys
	stEntries
	stDone
)

// NewFHIRReader reads a Bundle from r; name is used in messages.
func NewFHIRReader(r io.Reader, name string, opt FHIROptions) *FHIRReader {
	if opt.MaxEntryBytes <= 0 {
		opt.MaxEntryBytes = defaultMaxEntryBytes
	}
	if opt.MapSubject == nil {
		opt.MapSubject = PatientID
	}
	tr := &trackingReader{r: r, line: 1, limit: opt.MaxEntryBytes}
	return &FHIRReader{name: name, opt: opt, tr: tr, dec: json.NewDecoder(tr)}
}

// PatientID is the default subject mapping: the id of a Patient reference.
func PatientID(s FHIRSubject) (string, bool) {
	ref := s.Reference
	if i := strings.Index(ref, "/_history/"); i >= 0 {
		ref = ref[:i]
	}
	var id string
	switch {
	case strings.HasPrefix(ref, "Patient/"):
		id = ref[len("Patient/"):]
	case strings.Contains(ref, "/Patient/"):
		id = ref[strings.LastIndex(ref, "/Patient/")+len("/Patient/"):]
	default:
		return "", false
	}
	if id == "" || strings.ContainsAny(id, "/?#") {
		return "", false
	}
	return id, true
}

// Stats reports the entries passed over so far.
func (f *FHIRReader) Stats() FHIRStats { return f.stats }

// Row implements Source.
func (f *FHIRReader) Row() Row { return f.row }

// Rejection implements Source.
func (f *FHIRReader) Rejection() *Rejection { return f.rej }

// Err implements Source.
func (f *FHIRReader) Err() error { return f.err }

// Next implements Source.
func (f *FHIRReader) Next() bool {
	f.rej = nil
	for f.err == nil {
		switch f.state {
		case stStart:
			tok, err := f.dec.Token()
			if err == io.EOF {
				f.fail(-1, fmt.Errorf("%w: no JSON value", ErrEmptyFile))
				return false
			}
			if err != nil {
				f.failJSON(err)
				return false
			}
			if tok != json.Delim('{') {
				f.fail(-1, fmt.Errorf("%w: the file is not a JSON object", ErrNotBundle))
				return false
			}
			f.state = stKeys
		case stKeys:
			f.tr.advance(f.dec.InputOffset())
			if !f.dec.More() {
				f.finish()
				return false
			}
			tok, err := f.dec.Token()
			if err != nil {
				f.failJSON(err)
				return false
			}
			switch tok {
			case "resourceType":
				tok, err = f.dec.Token()
				if err != nil {
					f.failJSON(err)
					return false
				}
				s, _ := tok.(string)
				if s != "Bundle" {
					f.fail(f.dec.InputOffset(), fmt.Errorf("%w: resourceType is %v", ErrNotBundle, tok))
					return false
				}
				f.rtype = s
			case "entry":
				tok, err = f.dec.Token()
				if err != nil {
					f.failJSON(err)
					return false
				}
				if tok != json.Delim('[') {
					f.fail(f.dec.InputOffset(), fmt.Errorf("%w: entry is not an array", ErrNotBundle))
					return false
				}
				f.state = stEntries
			default:
				if err := f.skipValue(); err != nil {
					f.failJSON(err)
					return false
				}
			}
		case stEntries:
			f.tr.advance(f.dec.InputOffset())
			if !f.dec.More() {
				if _, err := f.dec.Token(); err != nil {
					f.failJSON(err)
					return false
				}
				f.state = stKeys
				continue
			}
			if f.readEntry() {
				return true
			}
		case stDone:
			return false
		}
	}
	return false
}

// finish reads the closing brace, makes sure nothing follows, and checks that
// the object was a Bundle (resourceType may come after entry in JSON).
func (f *FHIRReader) finish() {
	if _, err := f.dec.Token(); err != nil {
		f.failJSON(err)
		return
	}
	f.state = stDone
	if _, err := f.dec.Token(); err != io.EOF {
		werr := fmt.Errorf("%w: another JSON value follows", ErrTrailingData)
		if err != nil {
			werr = fmt.Errorf("%w: %v", ErrTrailingData, err)
		}
		f.fail(f.dec.InputOffset(), werr)
		return
	}
	if f.rtype != "Bundle" {
		f.fail(-1, fmt.Errorf("%w: no resourceType", ErrNotBundle))
	}
}

// skipValue passes over one JSON value with tokens, keeping memory flat even
// when the value is large.
func (f *FHIRReader) skipValue() error {
	depth := 0
	for {
		tok, err := f.dec.Token()
		if err != nil {
			return err
		}
		switch tok {
		case json.Delim('{'), json.Delim('['):
			depth++
		case json.Delim('}'), json.Delim(']'):
			depth--
		}
		if depth == 0 {
			return nil
		}
		f.tr.advance(f.dec.InputOffset())
	}
}

func (f *FHIRReader) fail(off int64, err error) {
	fe := &FileError{File: f.name, Offset: off, Err: err}
	if off > 0 {
		fe.Line = f.tr.lineAt(off)
	}
	f.err = fe
	f.state = stDone
}

// failJSON reports a decoder error: a syntax error at its offset, an entry
// too large, a truncated file, or the underlying reader's failure.
func (f *FHIRReader) failJSON(err error) {
	var se *json.SyntaxError
	switch {
	case errors.As(err, &se):
		f.fail(se.Offset, fmt.Errorf("%w: %s", ErrSyntax, se.Error()))
	case errors.Is(err, ErrEntryTooLarge):
		f.fail(f.entOff, fmt.Errorf("%w: entry %d exceeds %d bytes", ErrEntryTooLarge, f.entry, f.opt.MaxEntryBytes))
	case errors.Is(err, io.ErrUnexpectedEOF) || err == io.EOF:
		f.fail(f.dec.InputOffset(), fmt.Errorf("%w: file ends inside the bundle", ErrSyntax))
	default:
		f.fail(f.dec.InputOffset(), fmt.Errorf("read: %w", err))
	}
}

// The parts of a Bundle entry the reader uses; encoding/json skips the rest
// (narrative, meta, identifiers, components...).
type fhirEntry struct {
	Resource *fhirObservation `json:"resource"`
}

type fhirObservation struct {
	ResourceType      string        `json:"resourceType"`
	Status            string        `json:"status"`
	Code              fhirConcept   `json:"code"`
	Subject           *fhirRef      `json:"subject"`
	EffectiveDateTime *string       `json:"effectiveDateTime"`
	EffectiveInstant  *string       `json:"effectiveInstant"`
	EffectivePeriod   *fhirPeriod   `json:"effectivePeriod"`
	EffectiveTiming   any           `json:"effectiveTiming"`
	ValueQuantity     *fhirQuantity `json:"valueQuantity"`
	DataAbsentReason  *fhirConcept  `json:"dataAbsentReason"`
}

type fhirConcept struct {
	Coding []struct {
		System string `json:"system"`
		Code   string `json:"code"`
	} `json:"coding"`
	Text string `json:"text"`
}

type fhirRef struct {
	Reference  string `json:"reference"`
	Identifier *struct {
		System string `json:"system"`
		Value  string `json:"value"`
	} `json:"identifier"`
}

type fhirPeriod struct {
	Start *string `json:"start"`
	End   *string `json:"end"`
}

type fhirQuantity struct {
	Value  json.Number `json:"value"`
	Unit   string      `json:"unit"`
	System string      `json:"system"`
	Code   string      `json:"code"`
}

// readEntry decodes one entry and reports whether it produced a row or a
// rejection (false: skipped, or a file-level error was recorded).
func (f *FHIRReader) readEntry() bool {
	f.entOff, f.entLine = f.tr.entryStart()
	var e fhirEntry
	err := f.dec.Decode(&e)
	if err != nil {
		var se *json.SyntaxError
		if errors.As(err, &se) || errors.Is(err, io.ErrUnexpectedEOF) || errors.Is(err, io.EOF) ||
			errors.Is(err, ErrEntryTooLarge) || f.tr.err != nil {
			f.failJSON(err)
			return false
		}
	}
	idx := f.entry
	f.entry++
	f.stats.Entries++
	if err != nil {
		if e.Resource != nil && e.Resource.ResourceType != "" && e.Resource.ResourceType != "Observation" {
			f.stats.OtherResources++
			return false
		}
		f.stats.Observations++
		f.reject(idx, ReasonMalformed, "", "entry does not match the FHIR Observation structure: %s", jsonErrText(err))
		return true
	}
	r := e.Resource
	if r == nil || r.ResourceType != "Observation" {
		f.stats.OtherResources++
		return false
	}
	f.stats.Observations++
	return f.observation(idx, r)
}

// jsonErrText drops the package prefix and Go type names from a decoding
// error, which mean nothing to the people reading import reports.
func jsonErrText(err error) string {
	var te *json.UnmarshalTypeError
	if errors.As(err, &te) {
		return fmt.Sprintf("%s is a JSON %s", te.Field, te.Value)
	}
	return strings.TrimPrefix(err.Error(), "json: ")
}

func (f *FHIRReader) reject(idx int, why Reason, field, format string, args ...any) {
	raw := f.tr.slice(f.entOff, f.dec.InputOffset())
	f.rej = &Rejection{Reason: why, File: f.name, Line: f.entLine, Entry: idx, Offset: f.entOff, Field: field,
		Msg: fmt.Sprintf(format, args...), Raw: string(raw)}
}

func (f *FHIRReader) observation(idx int, r *fhirObservation) bool {
	switch r.Status {
	case "final", "amended", "corrected":
	case "entered-in-error":
		f.stats.EnteredInError++
		return false
	default:
		f.reject(idx, ReasonNotFinal, "status", "status %q is not final, amended or corrected", r.Status)
		return true
	}

	var kind cohort.Kind
	var seen []string
	for _, c := range r.Code.Coding {
		if c.System != systemLOINC {
			seen = append(seen, c.System+"|"+c.Code)
			continue
		}
		switch c.Code {
		case LOINCHeartRate:
			kind = cohort.HeartRate
		case LOINCSteps:
			kind = cohort.Steps
		default:
			seen = append(seen, c.System+"|"+c.Code)
			continue
		}
		break
	}
	if kind == 0 {
		f.reject(idx, ReasonUnknownCode, "code", "code %s is not LOINC %s (heart rate) or %s (steps)",
			strings.Join(seen, ", "), LOINCHeartRate, LOINCSteps)
		if len(seen) == 0 {
			f.rej.Msg = "code has no coding; want LOINC " + LOINCHeartRate + " (heart rate) or " + LOINCSteps + " (steps)"
		}
		return true
	}

	var subj FHIRSubject
	if r.Subject != nil {
		subj.Reference = r.Subject.Reference
		if r.Subject.Identifier != nil {
			subj.IdentifierSystem = r.Subject.Identifier.System
			subj.IdentifierValue = r.Subject.Identifier.Value
		}
	}
	sid, ok := f.opt.MapSubject(subj)
	if !ok || sid == "" {
		f.reject(idx, ReasonUnknownSubject, "subject", "subject %q does not name a participant of this study", subj.Reference)
		return true
	}

	q := r.ValueQuantity
	if q == nil || q.Value == "" {
		msg := "no valueQuantity.value"
		if r.DataAbsentReason != nil {
			msg += " (dataAbsentReason given)"
		}
		f.reject(idx, ReasonMissingValue, "valueQuantity", "%s", msg)
		return true
	}
	if !unitOK(kind, q) {
		f.reject(idx, ReasonWrongUnit, "valueQuantity", "unit %s for %s; want %s",
			describeUnit(q), kind, wantUnit(kind))
		return true
	}
	v, why := parseJSONValue(string(q.Value), kind)
	if why != 0 {
		f.reject(idx, why, "valueQuantity.value", "value %s for %s: %s", q.Value, kind, why.Label())
		return true
	}

	t, end, ok := f.effective(idx, kind, r)
	if !ok {
		return true
	}
	f.row = Row{StudyID: f.ids.get([]byte(sid)), Kind: kind, T: t, End: end, V: v, Line: f.entLine}
	return true
}

// effective reads the time of an observation. Heart rate takes
// effectiveDateTime, effectiveInstant, or the start of effectivePeriod; steps
// need effectivePeriod with both start and end, since a count means nothing
// without its interval.
func (f *FHIRReader) effective(idx int, kind cohort.Kind, r *fhirObservation) (t, end int64, ok bool) {
	parse := func(field, s string) (int64, bool) {
		ms, why := parseInstant([]byte(s))
		switch why {
		case 0:
			return ms, true
		case ReasonImpreciseTime:
			f.reject(idx, why, field, "%s %q is a date; a reading needs a clock time and UTC offset", field, s)
		case ReasonNoOffset:
			f.reject(idx, why, field, "%s %q has no UTC offset", field, s)
		default:
			f.reject(idx, why, field, "%s %q is not a FHIR dateTime with seconds and offset", field, s)
		}
		return 0, false
	}
	if r.EffectiveTiming != nil {
		f.reject(idx, ReasonBadTime, "effectiveTiming", "effectiveTiming is not supported; use effectiveDateTime or effectivePeriod")
		return 0, 0, false
	}
	if kind == cohort.Steps {
		p := r.EffectivePeriod
		if p == nil || p.Start == nil {
			f.reject(idx, ReasonMissingEnd, "effectivePeriod", "steps need effectivePeriod with start and end")
			return 0, 0, false
		}
		if p.End == nil {
			f.reject(idx, ReasonMissingEnd, "effectivePeriod.end", "steps need effectivePeriod.end, the end of the counting interval")
			return 0, 0, false
		}
		if t, ok = parse("effectivePeriod.start", *p.Start); !ok {
			return 0, 0, false
		}
		if end, ok = parse("effectivePeriod.end", *p.End); !ok {
			return 0, 0, false
		}
		if end <= t {
			f.reject(idx, ReasonEndBeforeStart, "effectivePeriod.end", "effectivePeriod.end %q is not after start %q", *p.End, *p.Start)
			return 0, 0, false
		}
		return t, end, true
	}
	switch {
	case r.EffectiveDateTime != nil:
		t, ok = parse("effectiveDateTime", *r.EffectiveDateTime)
	case r.EffectiveInstant != nil:
		t, ok = parse("effectiveInstant", *r.EffectiveInstant)
	case r.EffectivePeriod != nil && r.EffectivePeriod.Start != nil:
		t, ok = parse("effectivePeriod.start", *r.EffectivePeriod.Start)
	default:
		f.reject(idx, ReasonMissingField, "effective", "no effectiveDateTime, effectiveInstant or effectivePeriod.start")
		return 0, 0, false
	}
	return t, 0, ok
}

// Heart rate is per minute: UCUM "/min" is what the R4 vital-signs heart-rate
// profile fixes (and the spec's own example uses); "{beats}/min" is the same
// unit with an annotation. Steps are a count: UCUM unity, written "1" or as an
// annotation. Rates such as "/d" are refused: they belong to other LOINC codes
// (steps per 24 hours) with a different meaning of the number.
var (
	hrCodes    = []string{"/min", "{beats}/min", "{beat}/min"}
	hrTexts    = []string{"/min", "beats/minute", "beats/min", "bpm", "{beats}/min"}
	stepsCodes = []string{"{steps}", "{step}", "{count}", "1"}
	stepsTexts = []string{"steps", "step", "{steps}", "{step}"}
)

func unitOK(kind cohort.Kind, q *fhirQuantity) bool {
	codes, texts := hrCodes, hrTexts
	if kind == cohort.Steps {
		codes, texts = stepsCodes, stepsTexts
	}
	if q.Code != "" {
		if q.System != "" && q.System != systemUCUM {
			return false
		}
		return contains(codes, q.Code)
	}
	return contains(texts, strings.ToLower(strings.TrimSpace(q.Unit)))
}

func contains(list []string, s string) bool {
	for _, x := range list {
		if x == s {
			return true
		}
	}
	return false
}

func describeUnit(q *fhirQuantity) string {
	switch {
	case q.Code != "":
		return fmt.Sprintf("code %q (system %q)", q.Code, q.System)
	case q.Unit != "":
		return fmt.Sprintf("%q", q.Unit)
	}
	return "missing"
}

func wantUnit(kind cohort.Kind) string {
	if kind == cohort.Steps {
		return `UCUM "{steps}" or "1"`
	}
	return `UCUM "/min"`
}
