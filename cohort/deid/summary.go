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

// SummaryAgeCuts are the age bands of a referral summary: five-year bands
// from 50, so the bands meet the risk scores' steps at 65 and 75, with one
// top band from 90 that Age.Band names "90 or older". Ours; a function so no
// caller can change the rule for everyone.
func SummaryAgeCuts() []int { return []int{50, 55, 60, 65, 70, 75, 80, 85, 90} }

// ExportAgeCuts are the age bands of the dataset export: the statistics
// pages' subgroup bands, so analyses of the export match the tool's own.
func ExportAgeCuts() []int { return stats.DefaultAgeCuts() }

// PlaceholderDate is the date written where a file format insists on one
// (PDF creation and modification dates, zip entry times). A real day would
// be an element of a date tied to the person; a fixed one keeps re-rendered
// documents byte-identical.
func PlaceholderDate() time.Time { return time.Date(2000, time.January, 1, 0, 0, 0, 0, time.UTC) }
