// Package risk computes the stroke-risk scores a referral summary may list
// for the participant's physician, from the answers of the study's intake
// survey. Everything here is for physician review: the study does not treat,
// the scores come from self-reported answers, and whether to start
// anticoagulation is the physician's decision under local practice.
package risk

import (
	"cohortdesk/cohort"
)

// Answer is a yes/no intake answer that may be missing. The zero value is
// Unknown, so an answer nobody recorded can never count as "no". For
// physician review, like everything derived from it.
type Answer int8

// The possible answers.
const (
	Unknown Answer = iota
	No
	Yes
)

// String gives the answer as shown on the summary.
func (a Answer) String() string {
	switch a {
	case No:
		return "no"
	case Yes:
		return "yes"
	}
	return "unknown"
}

// Intake holds the risk factors the study knows from its intake survey.
// For physician review.
type Intake struct {
	Age      int        // whole years at the date of the summary
	AgeKnown bool       // false when the age was not recorded
	Sex      cohort.Sex // cohort.Unknown or empty when not recorded
	// HeartFailure is congestive heart failure (or left ventricular
	// dysfunction) as reported.
	HeartFailure Answer
	Hypertension Answer // hypertension, treated or not, as reported
	Diabetes     Answer // diabetes mellitus as reported
	// StrokeTIA is a prior stroke, transient ischaemic attack or
	// thromboembolism.
	StrokeTIA Answer
	// Vascular is vascular disease: prior myocardial infarction, peripheral
	// artery disease or aortic plaque.
	Vascular Answer
}

// Item is one score component, for display beside the total. For physician
// review.
type Item struct {
	Code   string // the score's letter, e.g. "A2", "S2", "Sc"
	Label  string // plain words for the summary
	Points int    // points this item adds (0 when absent or unknown)
	// MaxPoints is what the item could add; for an unknown item it is the
	// amount by which the total may understate the true score.
	MaxPoints int
	Known     bool // false when the intake answer was missing
}

// Score is a computed stroke-risk score. For physician review.
type Score struct {
	Name string // "CHA2DS2-VASc" or "CHA2DS2-VA"
	// Points counts the items known to be present. When Complete is false it
	// is a lower bound: unknown answers count 0 and the true score lies
	// between Points and UpperBound.
	Points     int
	UpperBound int  // the score if every unknown item were present
	Max        int  // the score's maximum, 9 or 8
	Complete   bool // no item was unknown, so Points is the score
	// Contributed lists the items that added points, in the score's order.
	Contributed []Item
	// Unknown lists the items that could not be assessed, in the same order.
	Unknown []Item
}

// CHA2DS2VASc computes the CHA2DS2-VASc score (Lip GYH, Nieuwlaat R,
// Pisters R, Lane DA, Crijns HJGM. Chest 2010;137:263-72): congestive heart
// failure 1, hypertension 1, age 75 or over 2, diabetes 1, prior stroke / TIA
// / thromboembolism 2, vascular disease 1, age 65-74 1, female sex 1;
// maximum 9. For physician review.
func CHA2DS2VASc(in Intake) Score { return score("CHA2DS2-VASc", in, true) }

// CHA2DS2VA computes the CHA2DS2-VA score of the 2024 ESC AF guidelines (from
// memory): the CHA2DS2-VASc items without the sex category, maximum 8. For
// physician review.
func CHA2DS2VA(in Intake) Score { return score("CHA2DS2-VA", in, false) }

func score(name string, in Intake, withSex bool) Score {
	s := Score{Name: name, Max: 8}
	if withSex {
		s.Max = 9
	}
	add := func(code, label string, pts int, a Answer) {
		it := Item{Code: code, Label: label, MaxPoints: pts, Known: a != Unknown}
		if a == Yes {
			it.Points = pts
		}
		s.record(it)
	}
	add("C", "congestive heart failure", 1, in.HeartFailure)
	add("H", "hypertension", 1, in.Hypertension)
	switch {
	case !in.AgeKnown:
		// Either age item may apply; together they add at most 2.
		s.record(Item{Code: "A2/A", Label: "age (not recorded)", MaxPoints: 2})
	case in.Age >= 75:
		s.record(Item{Code: "A2", Label: "age 75 or over", Points: 2, MaxPoints: 2, Known: true})
	}
	add("D", "diabetes", 1, in.Diabetes)
	add("S2", "prior stroke, TIA or thromboembolism", 2, in.StrokeTIA)
	add("V", "vascular disease", 1, in.Vascular)
	if in.AgeKnown && in.Age >= 65 && in.Age < 75 {
		s.record(Item{Code: "A", Label: "age 65-74", Points: 1, MaxPoints: 1, Known: true})
	}
	if withSex {
		switch in.Sex {
		case cohort.Female:
			s.record(Item{Code: "Sc", Label: "female sex", Points: 1, MaxPoints: 1, Known: true})
		case cohort.Male:
		default:
			s.record(Item{Code: "Sc", Label: "sex (not recorded)", MaxPoints: 1})
		}
	}
	s.Complete = len(s.Unknown) == 0
	return s
}

func (s *Score) record(it Item) {
	s.Points += it.Points
	if it.Known {
		s.UpperBound += it.Points
	} else {
		s.UpperBound += it.MaxPoints
		s.Unknown = append(s.Unknown, it)
	}
	if it.Points > 0 {
		s.Contributed = append(s.Contributed, it)
	}
}

// annualStrokeRate is the adjusted stroke rate (% a year) by CHA2DS2-VASc
// score 0-9 (Lip GYH et al. Chest 2010, as tabulated in later guidelines;
// verified, secondary). A copy circulates with 12.5 for score 8; the value
// read is 6.7. The rates are not monotone at 7-8 because few patients had
// those scores.
var annualStrokeRate = [10]float64{0, 1.3, 2.2, 3.2, 4.0, 6.7, 9.8, 9.6, 6.7, 15.2}

// AnnualStrokeRate returns the adjusted annual stroke rate in percent for a
// CHA2DS2-VASc score, and false for a score outside 0-9. It belongs to
// CHA2DS2-VASc only (there is no such table for CHA2DS2-VA here), and it
// describes the historical cohort the table was derived from, not this
// participant. For physician review.
func AnnualStrokeRate(score int) (float64, bool) {
	if score < 0 || score >= len(annualStrokeRate) {
		return 0, false
	}
	return annualStrokeRate[score], true
}
