package stats

import (
	"fmt"
	"math"
	"sort"
)

// Obs is one subject's follow-up: the time from the start event (a flag) to
// either the end event (an over-read) or the end of observation (the case is
// still open, or was closed another way), in whatever unit the caller uses
// consistently, usually days.
type Obs struct {
	Time  float64 // non-negative and finite
	Event bool    // true: the end event happened at Time; false: censored at Time
}

// Step is one row of a Kaplan-Meier table, at a distinct observed time.
type Step struct {
	Time     float64 // the observed time this row describes
	AtRisk   int     // subjects still under observation just before Time
	Events   int     // end events at Time
	Censored int     // subjects censored at Time
	Survival float64 // S(Time): the estimated share without the end event after Time
	// SE is Greenwood's standard error of Survival. It is NaN where Survival
	// has reached 0 (Greenwood's sum has a 1/0 term there; no finite value is
	// honest), and 0 before the first event.
	SE float64
	// Lo and Hi are the pointwise confidence band of Survival on the
	// log(-log) scale, at the level given to KaplanMeier. Before the first
	// event both are 1; where Survival is 0 both are 0.
	Lo, Hi float64
}

// Curve is a Kaplan-Meier estimate: a right-continuous step function that
// starts at 1 and drops only at event times (Kaplan EL, Meier P. J Am Stat
// Assoc 1958;53:457-81).
type Curve struct {
	Steps  []Step  // one per distinct time with an event or a censoring, in time order
	N      int     // subjects
	Events int     // end events observed
	Conf   float64 // confidence level of the band in Steps
}

// KaplanMeier estimates the curve from right-censored observations, with a
// pointwise confidence band at level conf (for example 0.95).
//
// Ties follow the usual convention: events at a time are counted before the
// censorings at that time, so a subject censored at t was at risk for the
// events at t. An empty input gives an empty curve, not an error: a study with
// no flags yet has nothing to estimate, and the median simply is not reached.
func KaplanMeier(obs []Obs, conf float64) (Curve, error) {
	if err := checkConf("kaplan-meier", conf); err != nil {
		return Curve{}, err
	}
	for i, o := range obs {
		if math.IsNaN(o.Time) || math.IsInf(o.Time, 0) || o.Time < 0 {
			return Curve{}, fmt.Errorf("stats: kaplan-meier: observation %d: time %v is not a finite non-negative number: %w", i, o.Time, ErrInvalid)
		}
	}
	sorted := make([]Obs, len(obs))
	copy(sorted, obs)
	sort.Slice(sorted, func(i, j int) bool { return sorted[i].Time < sorted[j].Time })
	var tallies []Tally
	for _, o := range sorted {
		if len(tallies) == 0 || tallies[len(tallies)-1].Time != o.Time {
			tallies = append(tallies, Tally{Time: o.Time})
		}
		if o.Event {
			tallies[len(tallies)-1].Events++
		} else {
			tallies[len(tallies)-1].Censored++
		}
	}
	return KaplanMeierTallies(tallies, conf)
}

// Tally is the observations at one time: how many ended with the end event
// and how many were censored there. A summary kept in storage holds its
// observations this way, so a curve over many subjects is computed from as
// many tallies as there are distinct times.
type Tally struct {
	Time     float64 // non-negative and finite
	Events   int
	Censored int
}

// KaplanMeierTallies is KaplanMeier over tallied observations: the same
// curve as KaplanMeier of the observations the tallies count. Tallies may
// come in any order and several may share a time; counts must not be
// negative.
func KaplanMeierTallies(tallies []Tally, conf float64) (Curve, error) {
	if err := checkConf("kaplan-meier", conf); err != nil {
		return Curve{}, err
	}
	sorted := make([]Tally, 0, len(tallies))
	n := 0
	for i, t := range tallies {
		if math.IsNaN(t.Time) || math.IsInf(t.Time, 0) || t.Time < 0 {
			return Curve{}, fmt.Errorf("stats: kaplan-meier: tally %d: time %v is not a finite non-negative number: %w", i, t.Time, ErrInvalid)
		}
		if t.Events < 0 || t.Censored < 0 {
			return Curve{}, fmt.Errorf("stats: kaplan-meier: tally %d: negative count: %w", i, ErrInvalid)
		}
		if t.Events+t.Censored > 0 {
			sorted = append(sorted, t)
			n += t.Events + t.Censored
		}
	}
	sort.SliceStable(sorted, func(i, j int) bool { return sorted[i].Time < sorted[j].Time })

	z := normalQuantile(conf)
	c := Curve{N: n, Conf: conf}
	atRisk := n
	s, greenwood := 1.0, 0.0
	for i := 0; i < len(sorted); {
		t := sorted[i].Time
		step := Step{Time: t, AtRisk: atRisk}
		for ; i < len(sorted) && sorted[i].Time == t; i++ {
			step.Events += sorted[i].Events
			step.Censored += sorted[i].Censored
		}
		if step.Events > 0 {
			d, r := float64(step.Events), float64(atRisk)
			s *= (r - d) / r
			if step.Events == atRisk {
				s = 0 // exactly, not a rounded product
				greenwood = math.Inf(1)
			} else {
				greenwood += d / (r * (r - d))
			}
		}
		step.Survival = s
		step.SE, step.Lo, step.Hi = band(s, greenwood, z)
		c.Steps = append(c.Steps, step)
		c.Events += step.Events
		atRisk -= step.Events + step.Censored
	}
	return c, nil
}

// band returns Greenwood's standard error and the log(-log) confidence band of
// S. The transformed band stays inside (0, 1), unlike S +- z*SE, which is why
// it is the common default for survival curves.
func band(s, greenwood, z float64) (se, lo, hi float64) {
	switch {
	case s == 0:
		return math.NaN(), 0, 0
	case s == 1:
		return 0, 1, 1
	}
	se = s * math.Sqrt(greenwood)
	ls := math.Log(s) // negative
	w := z * math.Sqrt(greenwood) / math.Abs(ls)
	return se, math.Pow(s, math.Exp(w)), math.Pow(s, math.Exp(-w))
}

// At returns S(t), the estimated share still without the end event after
// time t (1 before the first event).
func (c Curve) At(t float64) float64 {
	s := 1.0
	for _, st := range c.Steps {
		if st.Time > t {
			break
		}
		s = st.Survival
	}
	return s
}

// Median is the estimated median time to the end event with its interval.
// A bound that is "not reached" (the curve or its band never gets down to
// one half within follow-up) has its Reached flag false and value NaN; it is
// shown as "not reached", never as the last follow-up time.
type Median struct {
	Time      float64 // the median, NaN when not reached
	Reached   bool    // S(t) got down to 0.5 within follow-up
	Lo, Hi    float64 // interval bounds, NaN when not reached
	LoReached bool    // Lo is a time, not "not reached"
	HiReached bool    // Hi is a time, not "not reached"
}

// Median returns the smallest observed time at which S(t) <= 0.5. Where the
// curve sits exactly at 0.5 over an interval, some programs report the
// midpoint of that interval; we do not, so the median is always an observed
// event time. The interval is read off the pointwise log(-log) band in the
// manner of Brookmeyer R, Crowley J. Biometrics 1982;38:29-41: the lower bound
// is the first time the band's lower edge is at or below 0.5, the upper bound
// the first time its upper edge is. Where S has reached 0 the band is not
// defined (Greenwood's variance is infinite there), so such a step sets no
// bound: a bound not crossed before it stays open ("not reached") rather
// than closing at the last event, as the survival package of R reports it
// (its log-log limits are NA where the estimate is 0, and so are the
// median's limits that would rest on them; from memory, not run here).
func (c Curve) Median() Median {
	m := Median{Time: math.NaN(), Lo: math.NaN(), Hi: math.NaN()}
	for _, st := range c.Steps {
		if st.Events == 0 {
			continue
		}
		if !m.Reached && st.Survival <= 0.5 {
			m.Time, m.Reached = st.Time, true
		}
		if st.Survival == 0 {
			continue // no band here
		}
		if !m.LoReached && st.Lo <= 0.5 {
			m.Lo, m.LoReached = st.Time, true
		}
		if !m.HiReached && st.Hi <= 0.5 {
			m.Hi, m.HiReached = st.Time, true
		}
	}
	return m
}
