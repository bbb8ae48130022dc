// Package cohort holds the domain types shared by every part of cohortdesk and
// the rules that need no I/O: study weeks, reading kinds, errors. Its
// subpackages hold the computations (screen, stats, ecg, deid, followup, demo,
// wear). Nothing here reads the clock, logs, or touches files or the network.
package cohort

import (
	"errors"
	"fmt"
	"sort"
	"strings"
	"time"
)

// Kind says what a wear reading measures.
type Kind uint8

// The kinds of wear reading a study receives. The numeric values are stored in
// the database, so they never change.
const (
	HeartRate  Kind = 1 // beats per minute at an instant
	Steps      Kind = 2 // step count over the interval [At, End)
	RRInterval Kind = 3 // milliseconds since the previous beat, At is the beat time
)

// String gives the name used in CSV files and on screen.
func (k Kind) String() string {
	switch k {
	case HeartRate:
		return "heart_rate"
	case Steps:
		return "steps"
	case RRInterval:
		return "rr_interval"
	}
	return fmt.Sprintf("kind(%d)", uint8(k))
}

// ParseKind reads the CSV name of a kind.
func ParseKind(s string) (Kind, error) {
	switch strings.ToLower(strings.TrimSpace(s)) {
	case "heart_rate", "hr":
		return HeartRate, nil
	case "steps":
		return Steps, nil
	case "rr_interval", "rr":
		return RRInterval, nil
	}
	return 0, fmt.Errorf("unknown kind %q (want heart_rate, steps or rr_interval)", s)
}

// Samples is a column-oriented series of one kind of reading, sorted by time.
// Times are Unix milliseconds. Values are integers in the kind's unit (bpm,
// steps, ms). For steps, End holds the end of each counting interval; for the
// other kinds it is nil.
type Samples struct {
	T   []int64
	V   []int32
	End []int64
}

// Len is the number of readings.
func (s *Samples) Len() int { return len(s.T) }

// Append adds one reading at the end; callers keep the series sorted.
func (s *Samples) Append(t int64, v int32) {
	s.T = append(s.T, t)
	s.V = append(s.V, v)
}

// AppendInterval adds one interval reading (steps).
func (s *Samples) AppendInterval(t, end int64, v int32) {
	s.T = append(s.T, t)
	s.V = append(s.V, v)
	s.End = append(s.End, end)
}

// Sorted reports whether times are non-decreasing.
func (s *Samples) Sorted() bool {
	return sort.SliceIsSorted(s.T, func(i, j int) bool { return s.T[i] < s.T[j] })
}

// Week is the wear data of one participant-week, the unit of screening.
type Week struct {
	Week  int     // study week number, 0-based
	Start int64   // Unix ms of the week's first instant (local midnight)
	End   int64   // Unix ms just past the week's last instant
	HR    Samples // heart rate, bpm
	Steps Samples // step counts over intervals
	RR    Samples // beat-to-beat intervals, ms
}

// Date is a calendar day without a time zone (an enrolment day, a birth date).
type Date struct {
	Year  int
	Month time.Month
	Day   int
}

// DateOf returns the calendar day of t in t's location.
func DateOf(t time.Time) Date {
	y, m, d := t.Date()
	return Date{y, m, d}
}

// ParseDate reads YYYY-MM-DD.
func ParseDate(s string) (Date, error) {
	t, err := time.Parse("2006-01-02", strings.TrimSpace(s))
	if err != nil {
		return Date{}, fmt.Errorf("date %q: want YYYY-MM-DD", s)
	}
	return DateOf(t), nil
}

// String formats the day as YYYY-MM-DD.
func (d Date) String() string { return fmt.Sprintf("%04d-%02d-%02d", d.Year, d.Month, d.Day) }

// IsZero reports whether the date is unset.
func (d Date) IsZero() bool { return d.Year == 0 && d.Month == 0 && d.Day == 0 }

// In returns local midnight of the day in loc.
func (d Date) In(loc *time.Location) time.Time {
	return time.Date(d.Year, d.Month, d.Day, 0, 0, 0, 0, loc)
}

// AddDays moves the date by n calendar days.
func (d Date) AddDays(n int) Date {
	return DateOf(time.Date(d.Year, d.Month, d.Day+n, 12, 0, 0, 0, time.UTC))
}

// Monday is the Monday on or before d: the first day of its calendar week
// (weeks run Monday to Sunday, ISO 8601).
func (d Date) Monday() Date {
	wd := int(d.In(time.UTC).Weekday())
	return d.AddDays(-((wd + 6) % 7))
}

// DaysSince counts calendar days from o to d (negative when d is earlier).
func (d Date) DaysSince(o Date) int {
	a := time.Date(d.Year, d.Month, d.Day, 12, 0, 0, 0, time.UTC)
	b := time.Date(o.Year, o.Month, o.Day, 12, 0, 0, 0, time.UTC)
	return int(a.Sub(b).Round(24*time.Hour) / (24 * time.Hour))
}

// Before reports whether d is earlier than o.
func (d Date) Before(o Date) bool { return d.DaysSince(o) < 0 }

// StudyDay is the number of whole calendar days from the enrolment day to the
// moment t, counted in the participant's time zone. The enrolment day is day 0.
func StudyDay(enrolled Date, loc *time.Location, t time.Time) int {
	return DateOf(t.In(loc)).DaysSince(enrolled)
}

// StudyWeek is the study week of moment t: week N covers days [7N, 7N+7) after
// the enrolment day in the participant's time zone. Moments before enrolment
// give negative weeks.
func StudyWeek(enrolled Date, loc *time.Location, t time.Time) int {
	d := StudyDay(enrolled, loc, t)
	if d < 0 {
		return -((-d + 6) / 7)
	}
	return d / 7
}

// WeekBounds returns the first instant of study week n and the first instant of
// week n+1, both local midnights, so a week across a daylight-saving change is
// 167 or 169 hours long.
func WeekBounds(enrolled Date, loc *time.Location, n int) (start, end time.Time) {
	return enrolled.AddDays(7 * n).In(loc), enrolled.AddDays(7*n + 7).In(loc)
}

// Sex as recorded at intake.
type Sex string

// The recorded sexes; the study's intake form offers these.
const (
	Female  Sex = "F"
	Male    Sex = "M"
	Unknown Sex = "U"
)

// Sexes lists the recorded sexes in the order forms offer them.
func Sexes() []Sex { return []Sex{Female, Male, Unknown} }

// Label words a recorded sex for pages, files and documents: "female", "male"
// or "not recorded". Sex is not a Safe Harbor identifier; the wording is ours.
func (s Sex) Label() string {
	switch s {
	case Female:
		return "female"
	case Male:
		return "male"
	}
	return "not recorded"
}

// Errors that every layer understands. The web adapter maps them to statuses.
var (
	// ErrNotFound means the object does not exist or the caller may not know it does.
	ErrNotFound = errors.New("not found")
	// ErrConflict means the change collides with stored state (a duplicate, a stale version).
	ErrConflict = errors.New("conflict")
	// ErrForbidden means the caller's role does not allow the action.
	ErrForbidden = errors.New("forbidden")
)

// ValidationError lists problems with input, field by field, in words fit to show
// beside the fields of a form.
type ValidationError struct {
	Fields map[string]string
}

// Error joins the field messages in a stable order.
func (e *ValidationError) Error() string {
	keys := make([]string, 0, len(e.Fields))
	for k := range e.Fields {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	parts := make([]string, len(keys))
	for i, k := range keys {
		parts[i] = k + ": " + e.Fields[k]
	}
	return "invalid input: " + strings.Join(parts, "; ")
}

// Add records a problem with a field; the first message for a field wins.
func (e *ValidationError) Add(field, msg string) {
	if e.Fields == nil {
		e.Fields = map[string]string{}
	}
	if _, ok := e.Fields[field]; !ok {
		e.Fields[field] = msg
	}
}

// Err returns e when it holds any problem, else nil.
func (e *ValidationError) Err() error {
	if e == nil || len(e.Fields) == 0 {
		return nil
	}
	return e
}

// ConflictError carries what changed underneath the caller, for a clear message.
type ConflictError struct {
	Message string
	Changes map[string][2]string // field -> {theirs, yours}
}

// Error returns the message.
func (e *ConflictError) Error() string { return e.Message }

// Unwrap lets errors.Is(err, ErrConflict) match.
func (e *ConflictError) Unwrap() error { return ErrConflict }

// PublicError carries a message that is safe and useful to show the user,
// wrapping the kind of failure (ErrConflict, ErrNotFound, ...) for the status.
type PublicError struct {
	Message string
	Kind    error
}

// Error returns the message.
func (e *PublicError) Error() string { return e.Message }

// Unwrap exposes the kind.
func (e *PublicError) Unwrap() error { return e.Kind }
