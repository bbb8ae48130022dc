package followup

import (
	"fmt"
	"strings"
	"time"

	"cohortdesk/cohort"
)

// DefaultEpisodeGapWeeks is the episode gap used until the study sets one: two
// positive weeks at most this many weeks apart belong to one episode, so one
// negative or missing week between two positives does not open a second case.
// An illustrative default of ours.
const DefaultEpisodeGapWeeks = 2

// MaxEpisodeGapWeeks bounds the gap; a larger value would merge a whole
// study's flags into one case.
const MaxEpisodeGapWeeks = 26

// MaxClosureDays bounds the study's closure days.
const MaxClosureDays = 1000

// StudySettings are the study-wide settings an administrator edits: the
// study's name, zone and targets, and what the follow-up rules read from them
// (service levels, episode gap, working-day calendar).
type StudySettings struct {
	Name            string
	TimeZone        string // IANA name
	ContactRoute    string // generic contact route printed on referral summaries
	EnrolmentTarget int
	FollowUpWeeks   int // weeks of wear data per participant; 0: open-ended
	Service         ServiceLevels
	EpisodeGapWeeks int
	ClosureDays     []cohort.Date // days the team does not work, besides weekends; sorted
	Paper           Paper         // the paper the study prints on
	Configured      bool          // false until an administrator first saves the settings
}

// Paper is a paper size the study prints on. Stored as text.
type Paper string

// The paper sizes: A4 (ISO 216, 210 x 297 mm) and US Letter (8.5 x 11 in).
const (
	PaperA4     Paper = "a4"
	PaperLetter Paper = "letter"
)

// Papers lists the paper sizes in the order forms offer them.
func Papers() []Paper { return []Paper{PaperA4, PaperLetter} }

// Label names the paper size: "A4", "US Letter".
func (p Paper) Label() string {
	if p == PaperLetter {
		return "US Letter"
	}
	return "A4"
}

// Valid reports whether p is a paper size.
func (p Paper) Valid() bool { return p == PaperA4 || p == PaperLetter }

// DefaultStudySettings are the settings of a study nobody has set up yet.
func DefaultStudySettings() StudySettings {
	return StudySettings{TimeZone: "UTC", Service: DefaultServiceLevels(), EpisodeGapWeeks: DefaultEpisodeGapWeeks, Paper: PaperA4}
}

// Location is the study's time zone; UTC when the stored name is unreadable.
func (st StudySettings) Location() *time.Location {
	loc, err := time.LoadLocation(st.TimeZone)
	if err != nil {
		return time.UTC
	}
	return loc
}

// Calendar is the study's working-day calendar: its zone, its closure days and
// a Saturday-Sunday weekend.
func (st StudySettings) Calendar() Calendar {
	return NewCalendar(st.Location(), st.ClosureDays...)
}

// CheckTimeZone refuses a time zone name that is not an IANA zone. "Local"
// is refused too: it would mean whatever zone the server runs in.
func CheckTimeZone(name string) error {
	if _, err := time.LoadLocation(name); err != nil || name == "" || strings.EqualFold(name, "local") {
		return fmt.Errorf("enter a time zone name such as America/Chicago or Europe/Lisbon")
	}
	return nil
}

// CheckClosureDay refuses a closure day outside the years a study can run.
func CheckClosureDay(d cohort.Date) error {
	if d.Year < 2000 || d.Year > 2100 {
		return fmt.Errorf("%s is not a date between 2000 and 2100", d)
	}
	return nil
}

// Validate checks the settings; field names match the settings form.
func (st StudySettings) Validate() error {
	var ve cohort.ValidationError
	if st.Name == "" || len(st.Name) > 120 {
		ve.Add("name", "enter the study's name (up to 120 characters)")
	}
	if err := CheckTimeZone(st.TimeZone); err != nil {
		ve.Add("time_zone", err.Error())
	}
	if len(st.ContactRoute) > 500 {
		ve.Add("contact_route", "use at most 500 characters")
	}
	if st.EnrolmentTarget < 0 || st.EnrolmentTarget > 10_000_000 {
		ve.Add("enrolment_target", "enter a target from 0 to 10,000,000 participants")
	}
	if st.FollowUpWeeks < 0 || st.FollowUpWeeks > 520 {
		ve.Add("follow_up_weeks", "enter 0 (open-ended) to 520 weeks")
	}
	if err := st.Service.Validate(); err != nil {
		if sve, ok := err.(*cohort.ValidationError); ok {
			for f, msg := range sve.Fields {
				ve.Add(f, msg)
			}
		}
	}
	if st.EpisodeGapWeeks < 1 || st.EpisodeGapWeeks > MaxEpisodeGapWeeks {
		ve.Add("episode_gap_weeks", fmt.Sprintf("%d: want 1 to %d weeks", st.EpisodeGapWeeks, MaxEpisodeGapWeeks))
	}
	if !st.Paper.Valid() {
		ve.Add("paper", "choose A4 or US Letter")
	}
	if len(st.ClosureDays) > MaxClosureDays {
		ve.Add("closure_days", fmt.Sprintf("%d dates: at most %d closure days", len(st.ClosureDays), MaxClosureDays))
	}
	for _, d := range st.ClosureDays {
		if err := CheckClosureDay(d); err != nil {
			ve.Add("closure_days", err.Error())
		}
	}
	return ve.Err()
}
