package cascade

import (
	"errors"
	"fmt"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
	"cohortdesk/cohort/overread"
	"cohortdesk/cohort/screen"
)

// Filter chooses whose figures are counted.
type Filter struct {
	// ProtocolID is the protocol version whose screening results and cases
	// count; 0 is the active version (or the newest when none is active).
	ProtocolID int
	// SiteID restricts the figures to one site's participants; 0 is all.
	SiteID int
	// From and To keep participants enrolled on a day in [From, To), each
	// compared by its calendar day in its own location; zero is open. The
	// participants' later history is followed whatever its date.
	From, To time.Time
	// AsOf is the day open cases are censored at in the time to over-read;
	// zero is now. Counts are as the database stands when they are read.
	AsOf time.Time
}

// ErrPeriod is a period of enrolment that ends before its first day.
var ErrPeriod = errors.New("the period must end on or after its first day")

// EnrolledBetween keeps participants enrolled from the day from to the day
// to, both included; a zero day leaves that end open. A period that ends
// before its first day is ErrPeriod and leaves f unchanged.
func (f *Filter) EnrolledBetween(from, to cohort.Date) error {
	if !from.IsZero() && !to.IsZero() && to.Before(from) {
		return ErrPeriod
	}
	f.From, f.To = time.Time{}, time.Time{}
	if !from.IsZero() {
		f.From = from.In(time.UTC)
	}
	if !to.IsZero() {
		f.To = to.AddDays(1).In(time.UTC) // the filter's end is not included
	}
	return nil
}

// ProtocolRef names a screening protocol version.
type ProtocolRef struct {
	ID      int
	Name    string
	Version int
	Active  bool
}

// Label is "name vN".
func (p ProtocolRef) Label() string {
	if p.ID == 0 {
		return "no protocol"
	}
	return screen.VersionLabel(p.Name, p.Version)
}

// ChooseProtocol picks the version whose figures are counted: the one with
// the given id, or for id 0 the active version, or the newest (highest id)
// when none is active. An id no version has is cohort.ErrNotFound; with no
// versions at all and id 0 the zero ProtocolRef ("no protocol") is chosen.
func ChooseProtocol(versions []ProtocolRef, id int) (ProtocolRef, error) {
	var active, newest ProtocolRef
	for _, p := range versions {
		if id != 0 && p.ID == id {
			return p, nil
		}
		if p.Active {
			active = p
		}
		if p.ID > newest.ID {
			newest = p
		}
	}
	switch {
	case id != 0:
		return ProtocolRef{}, fmt.Errorf("protocol %d: %w", id, cohort.ErrNotFound)
	case active.ID != 0:
		return active, nil
	}
	return newest, nil
}

// Person is a participant as the figures see them.
type Person struct {
	ID         int64
	Site       string // the site's code
	Sex        cohort.Sex
	Age        *int // at enrolment; nil when not recorded
	Withdrawn  bool
	Sufficient bool // a week with a verdict (positive or negative) under the chosen version
	Positive   bool // a positive week under the chosen version
}

// Recording is an ECG recording as the figures see it.
type Recording struct {
	ID         int64
	Auto       overread.Auto // the recorder's own interpretation
	TooShort   bool          // under the 30 s a diagnostic read needs
	Conclusion overread.Conclusion
}

// diagnostic applies overread's diagnostic-recording rule.
func (r Recording) diagnostic() bool { return r.Conclusion.Diagnostic(r.TooShort) }

// Episode is a follow-up case (a flagged episode) as the figures see it.
type Episode struct {
	CaseID, ParticipantID int64
	ProtocolID            int
	State                 followup.State
	Flagged               time.Time
	ReachedAt             time.Time // zero when never reached
	ClosedAt              time.Time // zero while open
	Recordings            []Recording
}

// Rows is everything the cascade and the agreement statistics are computed
// from, as storage read it in one snapshot.
type Rows struct {
	Protocol ProtocolRef   // the chosen version (ChooseProtocol)
	Versions []ProtocolRef // every version, for choosing
	Loc      *time.Location
	AsOf     cohort.Date // open episodes are censored at this day
	// People are the participants the filter chose, with their screening
	// flags under the chosen version.
	People []Person
	// Episodes are those people's cases under every protocol version, in
	// case order, each with its recordings in the order they were taken.
	Episodes []Episode
}
