package deid

import (
	"fmt"
	"strconv"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/stats"
)

// Over89Label is the single category Safe Harbor allows for every age above
// 89 (45 CFR 164.514(b)(2)(i)(C)).
const Over89Label = "90 or older"

// AgeAt is the age in whole years on the reference day. A person born on
// 29 February becomes a year older on 1 March in common years (the birthday
// has not happened until the date passes 28 February).
func AgeAt(birth, ref cohort.Date) (int, error) {
	if err := checkDate("birth date", birth); err != nil {
		return 0, err
	}
	if err := checkDate("reference date", ref); err != nil {
		return 0, err
	}
	if ref.Before(birth) {
		return 0, fmt.Errorf("deid: age: reference date %v is before birth date %v: %w", ref, birth, ErrInvalid)
	}
	age := ref.Year - birth.Year
	if ref.Month < birth.Month || (ref.Month == birth.Month && ref.Day < birth.Day) {
		age--
	}
	return age, nil
}

// Age is what an export may show of a person's age.
type Age struct {
	// Years is the age in whole years when 89 or under; when Over89 is true
	// it is 90 and means "90 or older", never an exact age.
	Years  int
	Over89 bool // the person is 90 or older; show Over89Label
	// BirthYear is the year of birth, and BirthYearOK says whether an export
	// may show it. It may not when the year alone suggests an age over 89
	// (reference year minus birth year above 89), which also covers an
	// 89-year-old whose birthday this year has not come yet.
	BirthYear   int
	BirthYearOK bool // BirthYear may be shown
}

// AgeOf applies the Safe Harbor age rule to a birth date on the reference day.
func AgeOf(birth, ref cohort.Date) (Age, error) {
	years, err := AgeAt(birth, ref)
	if err != nil {
		return Age{}, err
	}
	a := Age{Years: years}
	if years > 89 {
		a.Years, a.Over89 = 90, true
	}
	if ref.Year-birth.Year <= 89 {
		a.BirthYear, a.BirthYearOK = birth.Year, true
	}
	return a, nil
}

// String gives the age as an export shows it: "47" or "90 or older".
func (a Age) String() string {
	if a.Over89 {
		return Over89Label
	}
	return strconv.Itoa(a.Years)
}

// Band names the age band. Bands must not split ages above 89: the top band
// has to start at 90 or below, or an error wrapping ErrInvalid is returned.
func (a Age) Band(b stats.AgeBands) (string, error) {
	cuts := b.Cuts()
	if len(cuts) > 0 && cuts[len(cuts)-1] > 90 {
		return "", fmt.Errorf("deid: age band: cut %d splits ages over 89, which Safe Harbor folds into one category: %w", cuts[len(cuts)-1], ErrInvalid)
	}
	if a.Over89 {
		l := b.Label(90)
		if l == "90+" {
			return Over89Label, nil
		}
		return l, nil
	}
	return b.Label(a.Years), nil
}

// checkDate refuses dates that do not exist (month 13, 30 February), which
// would otherwise be normalised silently by the time package.
func checkDate(field string, d cohort.Date) error {
	t := time.Date(d.Year, d.Month, d.Day, 12, 0, 0, 0, time.UTC)
	if d.Month < 1 || d.Month > 12 || t.Day() != d.Day || t.Month() != d.Month {
		return fmt.Errorf("deid: %s %v does not exist: %w", field, d, ErrInvalid)
	}
	return nil
}

// AgeSince is the age on the day today of a person whose age was recorded
// at enrolment (when the birth date is not at hand): the age at enrolment
// plus the whole years since the enrolment day, folded as FoldAge folds it.
func AgeSince(atEnrolment int, enrolled, today cohort.Date) Age {
	since, err := AgeAt(enrolled, today)
	if err != nil {
		since = 0 // today before enrolment, or no day: the age at enrolment
	}
	return FoldAge(atEnrolment + since)
}

// FoldAge applies the Safe Harbor age rule to an age already in whole years
// (an age recorded at enrolment, when the birth date is not at hand): 89
// stays 89, 90 and above become "90 or older". No birth year comes with it.
func FoldAge(years int) Age {
	if years > 89 {
		return Age{Years: 90, Over89: true}
	}
	return Age{Years: max(years, 0)}
}
