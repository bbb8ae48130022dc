package demo

import (
	"fmt"
	"strings"
	"time"

	"cohortdesk/cohort"
)

// Canary is one planted identifying value: which participant, which field,
// and the exact text that must never appear outside the system's PHI views.
type Canary struct {
	StudyID string
	Field   string // given_name, family_name, full_name, phone, phone_digits, email, street, city, birth_date, birth_date_us, zip, serial, study_id
	Value   string

	index int
}

// canaryIdentity is the fixed part of a canary participant; the birth date is
// set relative to today so each canary keeps its intended age.
type canaryIdentity struct {
	given, family, street, city, zip, serial string
	phone                                    string
	age                                      int
	month                                    time.Month
	dayOfMonth                               int
	domain                                   string
}

// canaryIdentities are deliberately outlandish. Canary 0 is born on 29
// February and has AF (so its referral summary exists); canary 1 is over 90 and
// lives in a restricted ZIP area; canary 2 also has a restricted ZIP code.
// Phone area codes starting with 1 do not exist in the North American plan, so
// these numbers cannot collide with any other generated number.
var canaryIdentities = []canaryIdentity{
	{"Zorvex", "Canarywing", "1 Canarywing Spur", "Canaryhold", "47913", "QX-CANARY-0001", "(101) 555-0101", 70, time.February, 29, "example.org"},
	{"Quillith", "Canaryfeather", "2 Canaryfeather Spur", "Canaryford", "89019", "QX-CANARY-0002", "(102) 555-0102", 92, time.July, 14, "example.net"},
	{"Ybbarune", "Canarytail", "3 Canarytail Spur", "Canarymere", "03601", "QX-CANARY-0003", "(103) 555-0103", 66, time.November, 3, "example.org"},
}

// chooseCanaries makes one participant per site (enrolled at least six weeks
// before today, so it has data) a canary and overwrites every PHI field.
func (s *Study) chooseCanaries(sel *selector, today cohort.Date) {
	n := len(s.Participants)
	for c, id := range canaryIdentities {
		if c >= len(s.Sites) {
			break
		}
		site := s.Sites[c].Code
		ks := sel.choose(1, n, func(k int) bool {
			p := &s.Participants[k]
			return p.Site == site && today.DaysSince(p.Enrolled) >= 42
		}, nil, true)
		if len(ks) == 0 {
			continue
		}
		k := ks[0]
		p := &s.Participants[k]
		p.Canary = true
		p.GivenName, p.FamilyName = id.given, id.family
		p.Street, p.City, p.ZIP, p.Serial, p.Phone = id.street, id.city, id.zip, id.serial, id.phone
		p.Email = strings.ToLower(id.given+"."+id.family) + "@" + id.domain
		year := today.Year - id.age
		if id.month == time.February && id.dayOfMonth == 29 {
			for year%4 != 0 || (year%100 == 0 && year%400 != 0) {
				year--
			}
		}
		p.BirthDate = cohort.Date{Year: year, Month: id.month, Day: id.dayOfMonth}
		digits := strings.Map(func(r rune) rune {
			if r >= '0' && r <= '9' {
				return r
			}
			return -1
		}, p.Phone)
		for _, f := range []struct{ field, value string }{
			{"given_name", p.GivenName},
			{"family_name", p.FamilyName},
			{"full_name", p.GivenName + " " + p.FamilyName},
			{"phone", p.Phone},
			{"phone_digits", digits},
			{"email", p.Email},
			{"street", p.Street},
			{"city", p.City},
			{"birth_date", p.BirthDate.String()},
			{"birth_date_us", fmt.Sprintf("%02d/%02d/%04d", int(p.BirthDate.Month), p.BirthDate.Day, p.BirthDate.Year)},
			{"zip", p.ZIP},
			{"serial", p.Serial},
			{"study_id", p.StudyID},
		} {
			s.canaries = append(s.canaries, Canary{StudyID: p.StudyID, Field: f.field, Value: f.value, index: k})
		}
	}
}

// HiddenFromMonitors reports whether a monitor's pages may not show the
// canary: every value but the study ID, which monitors work by.
func (c Canary) HiddenFromMonitors() bool { return c.Field != "study_id" }

// CanaryValues lists every planted canary value with its field. Five-digit ZIP
// codes and ten-digit phone digits are ordinary digit strings, so a test
// searching numeric output for them should match whole tokens.
func (s *Study) CanaryValues() []Canary { return append([]Canary(nil), s.canaries...) }

// Canaries lists the canary values as plain strings. None of them may appear
// in a de-identified export, a referral summary or a PDF: the list includes
// the canaries' study IDs, which are record numbers (Safe Harbor identifier 8
// or 18) and never leave the application, where participants are named by
// pseudonymous codes instead. Inside the application monitors do work by
// study ID (the README says so); they see none of the other values
// (Canary.HiddenFromMonitors).
func (s *Study) Canaries() []string {
	out := make([]string, len(s.canaries))
	for i, c := range s.canaries {
		out[i] = c.Value
	}
	return out
}
