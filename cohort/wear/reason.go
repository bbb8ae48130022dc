package wear

import (
	"errors"
	"fmt"
	"strconv"
	"strings"
)

// Reason says why one row of an import was refused. Reports group rejections
// by reason, and the quarantine keeps the reason beside the raw line. Store the
// String code, never the number: codes are stable, the numbering may grow.
type Reason uint8

// The rejection reasons. Each applies to one row (CSV) or one entry (FHIR);
// problems with the file as a whole are FileErrors instead.
const (
	ReasonFieldCount         Reason = iota + 1 // record has more or fewer fields than the header
	ReasonBadQuoting                           // quote characters break RFC 4180 rules
	ReasonMissingField                         // a required field is empty
	ReasonBadTime                              // time is not RFC 3339
	ReasonNoOffset                             // time has a clock time but no UTC offset
	ReasonImpreciseTime                        // time is a date or month without a clock time
	ReasonUnknownKind                          // kind is not heart_rate, steps or rr_interval
	ReasonBadNumber                            // value is not a decimal number
	ReasonNotInteger                           // a fraction where only whole numbers make sense
	ReasonOutOfRange                           // negative, or too large for the stored integer
	ReasonMissingEnd                           // a step count without the end of its interval
	ReasonEndBeforeStart                       // interval end not after its start
	ReasonUnexpectedEnd                        // an end time on a kind that has no interval
	ReasonMissingValue                         // no value at all
	ReasonUnknownCode                          // FHIR code is not one of the LOINC codes we read
	ReasonWrongUnit                            // FHIR unit is not the one the code needs
	ReasonNotFinal                             // FHIR status is not final, amended or corrected
	ReasonUnknownSubject                       // FHIR subject does not map to a study ID
	ReasonMalformed                            // FHIR element has the wrong JSON type
	ReasonUnknownParticipant                   // study ID matches no enrolled participant
	ReasonBeforeEnrolment                      // reading taken before the enrolment day
	ReasonBadWeek                              // study week is not a non-negative integer
	ReasonBadVerdict                           // verdict is not positive, negative or insufficient
	numReasons
)

var reasonNames = [numReasons][2]string{
	ReasonFieldCount:         {"field_count", "wrong number of fields"},
	ReasonBadQuoting:         {"bad_quoting", "malformed quoting"},
	ReasonMissingField:       {"missing_field", "required field empty"},
	ReasonBadTime:            {"bad_time", "unparsable time"},
	ReasonNoOffset:           {"no_offset", "time without UTC offset"},
	ReasonImpreciseTime:      {"imprecise_time", "date without clock time"},
	ReasonUnknownKind:        {"unknown_kind", "unknown kind"},
	ReasonBadNumber:          {"bad_number", "not a number"},
	ReasonNotInteger:         {"not_integer", "not a whole number"},
	ReasonOutOfRange:         {"out_of_range", "value out of range"},
	ReasonMissingEnd:         {"missing_end", "missing end time"},
	ReasonEndBeforeStart:     {"end_before_start", "end not after start"},
	ReasonUnexpectedEnd:      {"unexpected_end", "end time on an instant reading"},
	ReasonMissingValue:       {"missing_value", "missing value"},
	ReasonUnknownCode:        {"unknown_code", "unknown observation code"},
	ReasonWrongUnit:          {"wrong_unit", "wrong unit"},
	ReasonNotFinal:           {"not_final", "observation not final"},
	ReasonUnknownSubject:     {"unknown_subject", "subject not mapped to a study ID"},
	ReasonMalformed:          {"malformed", "malformed observation"},
	ReasonUnknownParticipant: {"unknown_participant", "no participant with this study ID"},
	ReasonBeforeEnrolment:    {"before_enrolment", "reading before enrolment"},
	ReasonBadWeek:            {"bad_week", "bad study week"},
	ReasonBadVerdict:         {"bad_verdict", "unknown verdict"},
}

// String is the stable code to store and to key reports by.
func (r Reason) String() string {
	if r > 0 && r < numReasons {
		return reasonNames[r][0]
	}
	return "reason(" + strconv.Itoa(int(r)) + ")"
}

// Label is the short phrase shown to study staff in import reports.
func (r Reason) Label() string {
	if r > 0 && r < numReasons {
		return reasonNames[r][1]
	}
	return r.String()
}

// ParseReason reads a code written by String, for quarantine rows read back
// from storage.
func ParseReason(code string) (Reason, error) {
	for r := Reason(1); r < numReasons; r++ {
		if reasonNames[r][0] == code {
			return r, nil
		}
	}
	return 0, fmt.Errorf("wear: unknown rejection reason %q", code)
}

// Rejection is one refused row, with enough to show the user what was wrong
// and to keep the row for download (quarantine).
type Rejection struct {
	Reason Reason
	File   string // the name given to the reader
	Line   int    // 1-based line where the row or FHIR entry starts; 0 when unknown
	Entry  int    // FHIR: 0-based index in Bundle.entry; -1 for CSV
	Offset int64  // FHIR: byte offset where the entry starts; -1 for CSV
	Field  string // column or element at fault, "" when the row as a whole is
	Msg    string // what was wrong, naming the field and the offending text
	Raw    string // the row as read (CSV record without its line ending, or the FHIR entry's JSON)
}

// Error formats the rejection as file:line: message, so it can be logged or
// wrapped like any error.
func (r *Rejection) Error() string {
	var b strings.Builder
	b.WriteString(r.File)
	if r.Line > 0 {
		b.WriteByte(':')
		b.WriteString(strconv.Itoa(r.Line))
	}
	if r.Entry >= 0 {
		b.WriteString(": entry ")
		b.WriteString(strconv.Itoa(r.Entry))
	}
	b.WriteString(": ")
	b.WriteString(r.Msg)
	return b.String()
}

// Errors that abort a whole file. They arrive wrapped in a *FileError that says
// where; match them with errors.Is.
var (
	// ErrEmptyFile: no header line, or no JSON value at all.
	ErrEmptyFile = errors.New("empty file")
	// ErrNotUTF8: a line holds bytes that are not UTF-8 (often a file saved
	// in a legacy code page).
	ErrNotUTF8 = errors.New("not valid UTF-8")
	// ErrMissingColumn: the header lacks a required column.
	ErrMissingColumn = errors.New("missing column")
	// ErrUnknownColumn: the header names a column the format does not have.
	ErrUnknownColumn = errors.New("unknown column")
	// ErrDuplicateColumn: the header names a column twice.
	ErrDuplicateColumn = errors.New("duplicate column")
	// ErrRecordTooLong: one record exceeds 1 MiB, usually an unclosed quote.
	ErrRecordTooLong = errors.New("record too long")
	// ErrBadHeader: the header line's quoting is broken.
	ErrBadHeader = errors.New("unreadable header")
	// ErrSyntax: the JSON is invalid or ends too early.
	ErrSyntax = errors.New("invalid JSON")
	// ErrNotBundle: the JSON is valid but not a FHIR Bundle.
	ErrNotBundle = errors.New("not a FHIR Bundle")
	// ErrEntryTooLarge: one Bundle entry exceeds FHIROptions.MaxEntryBytes.
	ErrEntryTooLarge = errors.New("bundle entry too large")
	// ErrTrailingData: something follows the Bundle's closing brace.
	ErrTrailingData = errors.New("data after the end of the bundle")
)

// FileError stops an import: the file cannot be read further, or not at all.
// It says what went wrong and where.
type FileError struct {
	File   string
	Line   int   // 1-based line, 0 when unknown
	Column int   // 1-based byte column, 0 when unknown
	Offset int64 // byte offset from the start of the file, -1 when unknown
	Err    error // the cause; one of the Err values above (wrapped with detail) or a read error
}

// Error gives file:line:column: cause.
func (e *FileError) Error() string {
	var b strings.Builder
	b.WriteString("wear: ")
	b.WriteString(e.File)
	if e.Line > 0 {
		b.WriteByte(':')
		b.WriteString(strconv.Itoa(e.Line))
		if e.Column > 0 {
			b.WriteByte(':')
			b.WriteString(strconv.Itoa(e.Column))
		}
	}
	if e.Offset >= 0 {
		b.WriteString(" (byte ")
		b.WriteString(strconv.FormatInt(e.Offset, 10))
		b.WriteByte(')')
	}
	b.WriteString(": ")
	b.WriteString(e.Err.Error())
	return b.String()
}

// Unwrap exposes the cause to errors.Is and errors.As.
func (e *FileError) Unwrap() error { return e.Err }

// quote shortens s for a message: long raw fields would swamp a report.
func quote(b []byte) string {
	const max = 48
	if len(b) > max {
		return strconv.Quote(string(b[:max])) + "..."
	}
	return strconv.Quote(string(b))
}
