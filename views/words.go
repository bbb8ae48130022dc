package views

import "strconv"

// Plural counts a thing in words: "1 case", "3 cases", "0 weeks". The one
// rule for counted words on every page; web's handlers use it too.
func Plural(n int, one string) string {
	if n == 1 {
		return "1 " + one
	}
	return strconv.Itoa(n) + " " + one + "s"
}

// Matching says how many things a filter matches, the verb agreeing:
// "1 case matches", "3 cases match".
// stopped: the count stopped at n and there are more ("more than 10000
// cases match").
func Matching(n int64, stopped bool, one string) string {
	if stopped {
		return "more than " + strconv.FormatInt(n, 10) + " " + one + "s match"
	}
	if n == 1 {
		return "1 " + one + " matches"
	}
	return strconv.FormatInt(n, 10) + " " + one + "s match"
}

// weeksOption words a choice of a number of weeks given as text.
func weeksOption(n string) string {
	if v, err := strconv.Atoi(n); err == nil {
		return Plural(v, "week")
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

// Noun is the word for a count of things, agreeing with it: "participant"
// for 1, "participants" otherwise (for a tile whose number stands apart).
func Noun(n int64, one string) string {
	if n == 1 {
		return one
	}
	return one + "s"
}
