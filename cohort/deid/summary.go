package deid

import (
	"time"

	"cohortdesk/cohort/stats"
)

// ReviewCaution is the caution every de-identified document and export
// carries. Removing the listed identifiers is only half of Safe Harbor
// (45 CFR 164.514(b)(2)(ii)): the releasing party must also have no actual
// knowledge that what remains could identify the person, which no program
// can know.
const ReviewCaution = "De-identified by the Safe Harbor method (45 CFR 164.514(b)(2)). Safe Harbor also requires that whoever releases this has no actual knowledge that what remains could identify the person: a member of the study team must review it before it is released."

// AgeCuts are the one set of age bands, wherever an age band is shown or
// written: the participant list and page, referral summaries, the
// statistics' subgroups and the dataset export. Five-year bands from 50, so
// the bands meet the risk scores' steps at 65 and 75, and one top band from
// 90 that Age.Band names "90 or older" (Safe Harbor folds every age above
// 89). Ours; a function so no caller can change the rule for everyone.
func AgeCuts() []int { return []int{50, 55, 60, 65, 70, 75, 80, 85, 90} }

// ageBands are AgeCuts as bands; the cuts are valid, so this never fails.
var ageBands, _ = stats.NewAgeBands(AgeCuts()...)

// AgeBand is the band of an age in whole years under AgeCuts, every age
// above 89 in "90 or older": "60-64", "<50".
func AgeBand(years int) string {
	band, _ := FoldAge(years).Band(ageBands) // AgeCuts end at 90: never an error
	return band
}

// AgeBandLabels lists every band of AgeCuts in order, so a table shows empty
// bands too.
func AgeBandLabels() []string {
	out := ageBands.Labels()
	out[len(out)-1] = Over89Label
	return out
}

// PlaceholderDate is the date written where a file format insists on one
// (PDF creation and modification dates, zip entry times). A real day would
// be an element of a date tied to the person; a fixed one keeps re-rendered
// documents byte-identical.
func PlaceholderDate() time.Time { return time.Date(2000, time.January, 1, 0, 0, 0, 0, time.UTC) }
