package outreach

import (
	"fmt"
	"strings"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
)

// Clock is a time of day in minutes after midnight, 0 to 1439.
type Clock int

// ParseClock reads "HH:MM" (24-hour).
func ParseClock(s string) (Clock, error) {
	t, err := time.Parse("15:04", s)
	if err != nil {
		return 0, fmt.Errorf("outreach: %q is not a time of day such as 21:00", s)
	}
	return Clock(t.Hour()*60 + t.Minute()), nil
}

// String writes the clock as HH:MM.
func (c Clock) String() string { return fmt.Sprintf("%02d:%02d", int(c)/60, int(c)%60) }

// Valid reports whether c is a time of day.
func (c Clock) Valid() bool { return c >= 0 && c < 24*60 }

// DefaultQuietFrom and DefaultQuietUntil bound the default quiet hours,
// 21:00 to 08:00 in the participant's own time zone: the hours in which US
// rules forbid telephone solicitation (47 CFR 64.1200(c)(1): not before 8
// a.m. or after 9 p.m. local time at the called party's location; from
// memory), taken here for texts and e-mails as well.
const (
	DefaultQuietFrom  Clock = 21 * 60
	DefaultQuietUntil Clock = 8 * 60
)

// Preferences are how a participant wishes to be contacted. Consent is what
// they agreed to (at enrolment or later); an opt-out is a later request to
// stop a channel, which overrides consent until it is withdrawn. Quiet hours
// are in the participant's own time zone; equal bounds mean none.
type Preferences struct {
	Recorded   bool             // false: nothing recorded yet; Defaults apply
	Preferred  followup.Channel // "" when the participant named none
	Consent    map[followup.Channel]bool
	OptedOut   map[followup.Channel]bool
	QuietFrom  Clock
	QuietUntil Clock
}

// Defaults are the preferences of a participant for whom none are recorded:
// e-mail and letters to the details given at enrolment, whose consent covers
// being contacted about the study; text messages only with consent recorded
// for them (common practice: automated texts need the person's express
// agreement); the default quiet hours.
func Defaults() Preferences {
	return Preferences{
		Consent:   map[followup.Channel]bool{followup.ChannelEmail: true, followup.ChannelLetter: true, followup.ChannelPhone: true},
		OptedOut:  map[followup.Channel]bool{},
		QuietFrom: DefaultQuietFrom, QuietUntil: DefaultQuietUntil,
	}
}

// Check refuses preferences that cannot be saved: a preferred channel that is
// not a channel, or one the participant has not consented to or has opted
// out of, and quiet hours that are not times of day.
func (p Preferences) Check() error {
	var ve cohort.ValidationError
	if p.Preferred != "" {
		switch {
		case !p.Preferred.Valid():
			ve.Add("preferred", "choose a channel")
		case !p.Allows(p.Preferred):
			ve.Add("preferred", "the preferred channel must be one the participant agreed to and has not opted out of")
		}
	}
	if !p.QuietFrom.Valid() {
		ve.Add("quiet_from", "enter a time of day such as 21:00")
	}
	if !p.QuietUntil.Valid() {
		ve.Add("quiet_until", "enter a time of day such as 08:00")
	}
	return ve.Err()
}

// Allows reports whether the participant may be contacted on channel c:
// consented and not opted out.
func (p Preferences) Allows(c followup.Channel) bool { return p.Consent[c] && !p.OptedOut[c] }

// Quiet reports whether local is inside the quiet hours.
func (p Preferences) Quiet(local time.Time) bool {
	if p.QuietFrom == p.QuietUntil {
		return false
	}
	m := Clock(local.Hour()*60 + local.Minute())
	if p.QuietFrom < p.QuietUntil {
		return m >= p.QuietFrom && m < p.QuietUntil
	}
	return m >= p.QuietFrom || m < p.QuietUntil
}

// QuietEnd is the first instant at or after now that lies outside the quiet
// hours, in the zone loc: now itself outside them, else the end of the quiet
// period now lies in. The end is a wall-clock time found on the calendar
// day, so a daylight-saving change in between moves it with the clock.
func (p Preferences) QuietEnd(now time.Time, loc *time.Location) time.Time {
	local := now.In(loc)
	if !p.Quiet(local) {
		return now
	}
	h, m := int(p.QuietUntil)/60, int(p.QuietUntil)%60
	end := time.Date(local.Year(), local.Month(), local.Day(), h, m, 0, 0, loc)
	if !end.After(local) {
		end = time.Date(local.Year(), local.Month(), local.Day()+1, h, m, 0, 0, loc)
	}
	return end
}

// Contact says which of the participant's contact details are on file.
type Contact struct {
	Email, Phone, Address bool
}

func (c Contact) has(ch followup.Channel) bool {
	switch ch {
	case followup.ChannelEmail:
		return c.Email
	case followup.ChannelText, followup.ChannelPhone:
		return c.Phone
	case followup.ChannelLetter:
		return c.Address
	}
	return false
}

// Decide says whether a message may go to the participant on channel ch at
// now, and when: at now, or, for e-mail and text messages in the quiet hours
// of the participant's zone loc, at their end (Held). A message that may not
// go is refused with the reason, on the field "channel": the desk does not
// send on the channel, the participant opted out of it or never agreed to
// it, or the detail it needs is not on file. Letters are posted, so quiet
// hours do not hold them.
func Decide(p Preferences, c Contact, ch followup.Channel, now time.Time, loc *time.Location) (sendAt time.Time, held bool, err error) {
	refuse := func(msg string) (time.Time, bool, error) {
		return time.Time{}, false, &cohort.ValidationError{Fields: map[string]string{"channel": msg}}
	}
	switch {
	case !Sendable(ch):
		return refuse("the desk does not send by " + ch.Label() + "; log the attempt instead")
	case p.OptedOut[ch]:
		return refuse("the participant opted out of " + ch.Label() + "s; use another channel")
	case !p.Consent[ch]:
		return refuse("the participant has not agreed to be contacted by " + ch.Label() + "; record their consent first, or use another channel")
	case !c.has(ch):
		what := map[followup.Channel]string{followup.ChannelEmail: "e-mail address", followup.ChannelText: "phone number", followup.ChannelLetter: "postal address"}[ch]
		return refuse("no " + what + " is on file for the participant")
	}
	if ch == followup.ChannelLetter {
		return now, false, nil
	}
	at := p.QuietEnd(now, loc)
	return at, at.After(now), nil
}

// AddressLines are the lines of a postal address block: the name, the
// street, and the town with its postal code; empty parts are left out.
func AddressLines(name, street, city, zip string) []string {
	var out []string
	for _, l := range []string{name, street, strings.TrimSpace(city + " " + zip)} {
		if l = strings.TrimSpace(l); l != "" {
			out = append(out, l)
		}
	}
	return out
}
