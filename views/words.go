package views

import (
	"strconv"

	"cohortdesk/cohort"
)

// Matching says how many things a filter matches, the verb agreeing:
// "1 case matches", "3 cases match".
// stopped: the count stopped at n and there are more ("more than 10000
// cases match").
func Matching(n int64, stopped bool, one string) string {
	if stopped {
		return "more than " + strconv.FormatInt(n, 10) + " " + cohort.Noun(n, one) + " match"
	}
	if n == 1 {
		return "1 " + one + " matches"
	}
	return strconv.FormatInt(n, 10) + " " + cohort.Noun(n, one) + " match"
}

// weeksOption words a choice of a number of weeks given as text.
func weeksOption(n string) string {
	if v, err := strconv.Atoi(n); err == nil {
		return cohort.Plural(v, "week")
	}
	return n + " weeks"
}

// otherCases words the cases a count leaves: "other case", "other cases".
func otherCases(n int) string {
	if n == 1 {
		return "other case"
	}
	return "other cases"
}
