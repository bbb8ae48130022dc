package web

import (
	"math"
	"strconv"

	"cohortdesk/cohort/cascade"
	"cohortdesk/cohort/stats"
)

// The agreement table as CSV, one writer for every download that holds it:
// the statistics page's tables (with a leading protocol column) and the
// weekly report's agreement.csv.

// agreementHeader names the columns agreementRecord writes.
func agreementHeader() []string {
	return []string{"dimension", "group", "flagged_episodes", "with_recording", "over_read", "af_confirmed",
		"ppv", "wilson_lo", "wilson_hi", "exact_lo", "exact_hi", "uninterpretable", "settled_read", "median_days", "median_lo", "median_hi",
		"events", "censored"}
}

// agreementRecord writes one group of the agreement statistics. A PPV and its
// intervals without an over-read, and a median or bound not reached, are
// left empty.
func agreementRecord(g cascade.Group) []string {
	ci := func(iv stats.Interval) (string, string) {
		if g.OverRead == 0 {
			return "", ""
		}
		return num(iv.Lo), num(iv.Hi)
	}
	wl, wh := ci(g.Wilson)
	el, eh := ci(g.Exact)
	med := func(ok bool, v float64) string {
		if !ok || g.Flagged == 0 {
			return ""
		}
		return num(v)
	}
	ppv := ""
	if g.OverRead > 0 {
		ppv = num(g.PPV.Value())
	}
	return []string{g.Dimension, csvSafe(g.Label), strconv.Itoa(g.Flagged), strconv.Itoa(g.WithRecording), strconv.Itoa(g.OverRead),
		strconv.Itoa(g.Confirmed), ppv, wl, wh, el, eh, strconv.Itoa(g.Uninterpretable.X), strconv.Itoa(g.Uninterpretable.N),
		med(g.Median.Reached, g.Median.Time), med(g.Median.LoReached, g.Median.Lo), med(g.Median.HiReached, g.Median.Hi),
		strconv.Itoa(g.Events), strconv.Itoa(g.Censored)}
}

// num writes a number for a CSV file: fractions with six decimals, nothing
// for an undefined value.
func num(v float64) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return ""
	}
	return strconv.FormatFloat(v, 'f', 6, 64)
}
