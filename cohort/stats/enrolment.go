package stats

import (
	"fmt"
	"math"

	"cohortdesk/cohort"
)

// Scenario is one projection of the date the enrolment target is reached,
// at one weekly rate.
type Scenario struct {
	RatePerWeek float64 // enrolments a week assumed by this scenario
	// Reachable is false when the rate is zero: at zero enrolments a week the
	// target is never reached, and no date is given.
	Reachable bool
	Weeks     int         // whole weeks from the as-of date; see ProjectEnrolment
	Date      cohort.Date // as-of date + 7 * Weeks days
}

// Projection estimates when a study (or site) reaches its enrolment target
// from its recent weekly enrolment counts.
type Projection struct {
	AsOf      cohort.Date // the day the projection is made, passed in
	Enrolled  int         // enrolled so far
	Target    int         // the enrolment target
	Remaining int         // max(0, Target - Enrolled)
	Met       bool        // the target is already reached; every scenario is dated AsOf
	Window    int         // weeks of history used
	Count     int         // enrolments in the window
	// Expected uses the observed rate; Optimistic the upper and Pessimistic
	// the lower bound of the rate's exact Poisson interval, so the range of
	// dates says how much the recent weeks can tell.
	Expected, Optimistic, Pessimistic Scenario
}

// ProjectEnrolment projects the date the target is reached as of the day
// asOf, given the enrolments so far and the counts in each of the last
// len(weekly) whole weeks (the last entry is the week ending at asOf). The
// weekly rate is a Poisson rate over that window with its exact interval at
// level conf.
//
// Rounding: the weeks needed are ceil(remaining / rate), so the date is the
// end of the week in which the target is expected to be crossed, never a day
// earlier than the arithmetic allows. The expected scenario does this in
// integers (ceil(remaining * window / count)): with 13 enrolments in 3 weeks
// and 65 remaining the answer is exactly 15 weeks, where floating point
// division gives 15.000000000000002 and so 16.
func ProjectEnrolment(asOf cohort.Date, enrolled, target int, weekly []int, conf float64) (Projection, error) {
	switch {
	case enrolled < 0:
		return Projection{}, fmt.Errorf("stats: enrolment projection: enrolled = %d is negative: %w", enrolled, ErrInvalid)
	case target < 1:
		return Projection{}, fmt.Errorf("stats: enrolment projection: target = %d, want at least 1: %w", target, ErrInvalid)
	case len(weekly) == 0:
		return Projection{}, fmt.Errorf("stats: enrolment projection: no weekly counts given: %w", ErrInvalid)
	}
	count := 0
	for i, v := range weekly {
		if v < 0 {
			return Projection{}, fmt.Errorf("stats: enrolment projection: weekly[%d] = %d is negative: %w", i, v, ErrInvalid)
		}
		count += v
	}
	rate, ci, err := PoissonRate(count, float64(len(weekly)), conf)
	if err != nil {
		return Projection{}, err
	}
	p := Projection{
		AsOf: asOf, Enrolled: enrolled, Target: target,
		Remaining: max(0, target-enrolled), Window: len(weekly), Count: count,
	}
	p.Met = p.Remaining == 0

	p.Expected = Scenario{RatePerWeek: rate}
	if p.Met {
		p.Expected.Reachable, p.Expected.Date = true, asOf
	} else if count > 0 {
		num := p.Remaining * len(weekly)
		p.Expected.Weeks = (num + count - 1) / count
		p.Expected.Reachable = true
		p.Expected.Date = asOf.AddDays(7 * p.Expected.Weeks)
	}
	p.Optimistic = scenario(asOf, p.Remaining, ci.Hi)
	p.Pessimistic = scenario(asOf, p.Remaining, ci.Lo)
	return p, nil
}

func scenario(asOf cohort.Date, remaining int, rate float64) Scenario {
	s := Scenario{RatePerWeek: rate}
	switch {
	case remaining == 0:
		s.Reachable, s.Date = true, asOf
	case rate > 0:
		w := math.Ceil(float64(remaining) / rate)
		if w > math.MaxInt32 {
			// Tens of millions of weeks is "not in this study's lifetime";
			// a date that far out would overflow the calendar arithmetic.
			return s
		}
		s.Reachable, s.Weeks = true, int(w)
		s.Date = asOf.AddDays(7 * s.Weeks)
	}
	return s
}
