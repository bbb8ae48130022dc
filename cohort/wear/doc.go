// Package wear does the CPU work of importing wear data: it reads readings
// from CSV files and FHIR Bundles, refuses bad rows one by one with a reason,
// groups good rows into participant-week series, merges series without
// duplicates, and packs a series into a compact byte string for storage. It
// also reads external verdict files: another algorithm's call on each
// participant-week, in the screen's words (screen.Verdict). It does no I/O of
// its own beyond the io.Reader it is given, and keeps memory bounded by one
// record, one Bundle entry, or the Grouper's budget, never by the size of a
// file.
//
// # Readings CSV format
//
// A readings file is UTF-8 text (a leading byte-order mark is allowed) in
// RFC 4180 CSV: comma-separated, fields may be enclosed in double quotes,
// a quote inside a quoted field is written twice, and a quoted field may
// contain commas and line breaks. Lines end in LF or CRLF. Blank lines are
// skipped. Spaces and tabs around a field's value are ignored.
//
// The first line is a header naming the columns, in any order, matched
// without regard to letter case:
//
//	study_id   the participant's study ID, as the study issued it (required)
//	time       when the reading was taken, or a step interval began (required)
//	kind       heart_rate, steps or rr_interval (hr and rr are accepted too)
//	value      the reading (required)
//	end_time   end of the counting interval: required for steps and empty
//	           for the other kinds; the column may be left out of files
//	           without steps
//
// Any other column makes the whole file fail with an "unknown column" error
// naming it: a misspelt column would otherwise look like a missing one, and
// an unexpected one (a unit, a time zone) may change what the others mean.
//
// Times are RFC 3339 with a UTC offset, for example 2026-03-02T07:15:00-05:00
// or 2026-03-02T12:15:00Z: four-digit year, 'T', two-digit hours, minutes and
// seconds, an optional fraction of a second after '.', then 'Z' or ±hh:mm.
// Fractions are kept to the millisecond (further digits are dropped). A time
// without offset is refused, because the study week of a reading depends on
// the participant's time zone and a local clock time cannot be placed.
//
// Values are plain decimal numbers (digits, an optional '.' and fraction; no
// exponent or thousands separators):
//
//	heart_rate   beats per minute; a fraction is rounded to the nearest whole
//	             beat per minute, halves away from zero (72.5 becomes 73)
//	steps        a whole number of steps (120 or 120.0; 120.5 is refused)
//	             counted over [time, end_time), and end_time must be after time
//	rr_interval  milliseconds from the previous beat; rounded to whole
//	             milliseconds like heart rate
//
// Values are never negative and at most 2147483647. Whether a value is
// plausible (a heart rate of 400) is not decided here: the screening
// protocol's cleaning step decides that, and counts what it drops.
//
// Example:
//
//	study_id,time,kind,value,end_time
//	S-0001,2026-03-02T07:15:00-05:00,heart_rate,64,
//	S-0001,2026-03-02T07:15:00-05:00,steps,112,2026-03-02T07:16:00-05:00
//	S-0001,2026-03-02T07:15:00.250-05:00,rr_interval,938,
//
// # What is refused, and how
//
// A line that breaks a rule is refused on its own, and reading goes on. Each
// refusal (a Rejection) carries a Reason code with a short label for reports,
// a message naming the field and the offending text, the line number where
// the record starts, and the raw record for the quarantine. The reasons a
// readings CSV line can get are: wrong number of fields, malformed quoting,
// required field empty, unparsable time, time without UTC offset, date
// without clock time, unknown kind, not a number, not a whole number (steps),
// value out of range, missing end time, end not after start, end time on an
// instant reading, missing value. When a line has several faults, the first
// in column order study_id, time, kind, value, end_time is reported.
//
// The whole file fails (a FileError with file, line and column) when it is
// empty, has no usable header (missing, unknown or repeated columns), is not
// valid UTF-8, holds a record longer than 1 MiB (usually an unclosed quote),
// or cannot be read.
//
// # FHIR Bundles
//
// FHIRReader reads an HL7 FHIR R4 Bundle in JSON, of any Bundle type, entry
// by entry. It turns Observations into readings:
//
//   - code: a coding with system http://loinc.org and code 8867-4 (heart
//     rate) or 55423-8 (number of steps); anything else is refused as an
//     unknown code. Category is not checked: profiles disagree on it
//     (vital-signs, activity, their own), and the LOINC code decides.
//   - valueQuantity: heart rate in UCUM "/min" (the unit the R4 vital-signs
//     heart-rate profile fixes); steps as a count, UCUM "{steps}", "{step}",
//     "{count}" or "1". Without a code, the unit text is checked ("beats/minute",
//     "bpm", "steps"...). Rates such as "/d" are refused as the wrong unit.
//     A missing value (or only a dataAbsentReason) is refused. Numbers follow
//     the CSV rules above; JSON exponents are allowed.
//   - effective[x]: heart rate takes effectiveDateTime, effectiveInstant or
//     effectivePeriod.start; steps need effectivePeriod with start and end.
//     Times need seconds and an offset; a bare date (which FHIR allows) is
//     refused as a date without clock time.
//   - subject: mapped to a study ID by FHIROptions.MapSubject; by default
//     "Patient/<id>" maps to <id>.
//   - status: final, amended and corrected are read; entered-in-error is
//     skipped and counted in FHIRStats (the sender withdrew it, so it is not
//     a fault of the file; readings already stored from an earlier import
//     are not removed by this package); any other status is refused.
//
// Entries holding other resources (Patient, Device...) are counted and passed
// over. A Rejection from a Bundle carries the entry index, the line where the
// entry starts, and the entry's JSON as Raw. Invalid JSON, a top level that is
// not a Bundle, or an entry over FHIROptions.MaxEntryBytes stops the file.
//
// # Series storage
//
// Encode packs one participant-week-kind series into a compact byte string
// (layout in codec.go), typically 2 to 3 bytes per heart-rate reading;
// Decode unpacks it and never panics on corrupt input. MergeWithStats joins a
// stored series with new readings, dropping exact duplicates and keeping (and
// counting) conflicting readings at the same instant. Grouper sorts rows into
// series by participant, study week (cohort.StudyWeek) and kind under a
// memory budget.
package wear
