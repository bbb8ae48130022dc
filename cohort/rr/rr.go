package rr

import (
	"math"
	"slices"
	"strconv"

	"cohortdesk/cohort"
)

// Params of the beat-interval method. Every value is a screening protocol
// parameter, so the JSON names are part of the stored protocol format.
type Params struct {
	// SegmentBeats is the number of beats per segment; default 128 (from
	// memory, Dash 2009).
	SegmentBeats int `json:"segment_beats"`
	// NRMSSDMin: a segment is AF-like when normalised RMSSD > this; default
	// 0.1 (from memory, Dash 2009).
	NRMSSDMin float64 `json:"nrmssd_min"`
	// EntropyMin: AF-like when normalised Shannon entropy > this; default 0.7
	// (from memory, Dash 2009).
	EntropyMin float64 `json:"entropy_min"`
	// Bins is the number of equal-width bins for the entropy; default 16
	// (from memory, Dash 2009).
	Bins int `json:"bins"`
	// Trim is how many of the shortest and, separately, of the longest
	// intervals are removed before the entropy, so a few ectopic beats or
	// detection errors do not stretch the bin range; default 8 (from memory,
	// Dash 2009).
	Trim int `json:"trim"`
	// TPRBandSD: AF-like when the turning point count lies within the mean
	// plus or minus this many standard deviations of an independent random
	// series; default 1.96, the two-sided 95% normal band (implementations
	// differ, from memory).
	TPRBandSD float64 `json:"tpr_band_sd"`
	// ExactBins bins whole-millisecond intervals in exact integer
	// arithmetic, so a value on an interior bin edge goes to the upper bin
	// as a standard histogram puts it. Without it the edges are computed in
	// floating point, as the first version of the screen did, and a value
	// on an edge may land in the lower bin. It is not a stored parameter:
	// screen.Protocol.RRParams sets it from the protocol's algorithm
	// revision, so results stored under the first rule recompute exactly.
	ExactBins bool `json:"-"`
}

// DefaultParams returns the published-method defaults (all "from memory", see
// the field comments). ExactBins is left to the caller (see its comment).
func DefaultParams() Params {
	return Params{
		SegmentBeats: 128,  // from memory, Dash 2009
		NRMSSDMin:    0.1,  // from memory, Dash 2009
		EntropyMin:   0.7,  // from memory, Dash 2009
		Bins:         16,   // from memory, Dash 2009
		Trim:         8,    // from memory, Dash 2009
		TPRBandSD:    1.96, // two-sided 95% normal quantile; band choice from memory
	}
}

// MaxSegmentBeats bounds SegmentBeats so a stored protocol cannot ask for
// segments longer than any real recording would give in a week.
const MaxSegmentBeats = 100000

// Validate checks that the parameters describe a computable method. The field
// keys are the JSON names so a form can show each message beside its field.
func (p Params) Validate() error {
	var e cohort.ValidationError
	p.ValidateInto(&e, "")
	return e.Err()
}

// ValidateInto adds the parameter problems to e with every field key prefixed
// by prefix (for example "rr."), so a larger configuration can embed Params
// and report all problems at once.
func (p Params) ValidateInto(e *cohort.ValidationError, prefix string) {
	if p.SegmentBeats < 3 || p.SegmentBeats > MaxSegmentBeats {
		e.Add(prefix+"segment_beats", "must be between 3 and "+strconv.Itoa(MaxSegmentBeats)+" beats")
	}
	if p.Bins < 2 {
		e.Add(prefix+"bins", "must be at least 2")
	}
	if p.Trim < 0 {
		e.Add(prefix+"trim", "must not be negative")
	} else if p.SegmentBeats >= 3 && p.SegmentBeats-2*p.Trim < 2 {
		e.Add(prefix+"trim", "leaves fewer than 2 intervals of a segment for the entropy (segment_beats - 2 x trim must be at least 2)")
	}
	if !finite(p.NRMSSDMin) || p.NRMSSDMin < 0 {
		e.Add(prefix+"nrmssd_min", "must be a finite number, 0 or more")
	}
	if !finite(p.EntropyMin) || p.EntropyMin < 0 || p.EntropyMin > 1 {
		e.Add(prefix+"entropy_min", "must be between 0 and 1 (the entropy is normalised)")
	}
	if !finite(p.TPRBandSD) || p.TPRBandSD <= 0 {
		e.Add(prefix+"tpr_band_sd", "must be a finite number above 0")
	}
}

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

// RMSSD is the root mean square of successive differences in ms, as defined by
// the Task Force of the ESC and NASPE (Circulation 1996;93:1043-65):
// sqrt(mean((rr_i - rr_(i-1))^2)) over the n-1 successive differences. It is 0
// for fewer than two intervals, where no difference exists.
func RMSSD(rr []float64) float64 {
	if len(rr) < 2 {
		return 0
	}
	var s float64
	for i := 1; i < len(rr); i++ {
		d := rr[i] - rr[i-1]
		s += d * d
	}
	return math.Sqrt(s / float64(len(rr)-1))
}

// NormalisedRMSSD is RMSSD divided by the mean interval, so the figure does
// not grow merely because the heart is slow. It is 0 when the mean is not
// positive or there are fewer than two intervals.
func NormalisedRMSSD(rr []float64) float64 {
	m := mean(rr)
	if m <= 0 {
		return 0
	}
	return RMSSD(rr) / m
}

func mean(x []float64) float64 {
	if len(x) == 0 {
		return 0
	}
	var s float64
	for _, v := range x {
		s += v
	}
	return s / float64(len(x))
}

// entropy bins the intervals left after removing the trim shortest and trim
// longest into bins equal-width bins spanning their range, and returns
// -sum(p ln p) / ln(bins), which is 1 for an even spread over all bins and 0
// when every interval falls in one bin. Bin k is [lo + k w, lo + (k+1) w)
// with w = (hi - lo) / bins, and the last bin also holds hi (the convention
// of a standard histogram). With exact set and whole-millisecond data the
// bin of v is floor((v - lo) bins / (hi - lo)) in integer arithmetic, so a
// value on an interior edge goes to the upper bin without fail; otherwise
// the edges are computed in floating point. The scratch space is the
// caller's so Analyse does not allocate per segment: buf has len(rr)
// elements, counts has bins elements. Params.Validate keeps bins at 2 or
// more and leaves intervals after trimming.
func entropy(rr []float64, bins, trim int, buf []float64, counts []int, exact bool) float64 {
	copy(buf, rr)
	slices.Sort(buf)
	kept := buf[trim : len(buf)-trim]
	lo, hi := kept[0], kept[len(kept)-1]
	if !(hi > lo) {
		return 0
	}
	clear(counts)
	if exact && wholeMillis(kept) {
		ilo, span, nb := int64(lo), int64(hi)-int64(lo), int64(bins)
		for _, v := range kept {
			k := (int64(v) - ilo) * nb / span
			if k >= nb { // the maximum lands on the upper edge of the last bin
				k = nb - 1
			}
			counts[k]++
		}
	} else {
		scale := float64(bins) / (hi - lo)
		for _, v := range kept {
			k := int((v - lo) * scale)
			if k >= bins { // the maximum lands on the upper edge of the last bin
				k = bins - 1
			}
			counts[k]++
		}
	}
	n := float64(len(kept))
	var h float64
	for _, c := range counts {
		if c > 0 {
			p := float64(c) / n
			h -= p * math.Log(p)
		}
	}
	return h / math.Log(float64(bins))
}

// maxExactMillis bounds the intervals binned in integers: (v - lo) * bins
// stays far inside int64 for any interval a heart produces.
const maxExactMillis = 1 << 40

// wholeMillis reports whether every (sorted) value is a whole number of
// milliseconds within maxExactMillis.
func wholeMillis(sorted []float64) bool {
	if sorted[0] < -maxExactMillis || sorted[len(sorted)-1] > maxExactMillis {
		return false
	}
	for _, v := range sorted {
		if v != math.Trunc(v) {
			return false
		}
	}
	return true
}

// TurningPoints counts the interior points that are a strict local maximum or
// a strict local minimum. Ties are not turning points, so integer-rounded
// intervals that repeat do not count.
func TurningPoints(x []float64) int {
	n := 0
	for i := 1; i+1 < len(x); i++ {
		a, b, c := x[i-1], x[i], x[i+1]
		if (b > a && b > c) || (b < a && b < c) {
			n++
		}
	}
	return n
}

// TurningPointBand is the range of turning point counts expected of n
// independent values: 2(n-2)/3 plus or minus sd standard deviations, with
// variance (16n-29)/90 (the turning point test for randomness, Brockwell PJ,
// Davis RA, Introduction to Time Series and Forecasting, 2nd ed., 2002, p. 36).
func TurningPointBand(n int, sd float64) (lo, hi float64) {
	if n < 3 {
		return 0, 0
	}
	mu := 2 * float64(n-2) / 3
	s := math.Sqrt((16*float64(n) - 29) / 90)
	return mu - sd*s, mu + sd*s
}

// Segment is the result of one fixed-length beat segment.
type Segment struct {
	// Start is the index of the first beat of the segment in the input.
	Start int `json:"start"`
	// NRMSSD is the normalised RMSSD of the segment.
	NRMSSD float64 `json:"nrmssd"`
	// Entropy is the normalised Shannon entropy after trimming.
	Entropy float64 `json:"entropy"`
	// TurningPoints is the count of interior strict local extrema.
	TurningPoints int `json:"turning_points"`
	// TPR is TurningPoints / (SegmentBeats-2), the share of interior points.
	TPR float64 `json:"tpr"`
	// AFLike is true when all three criteria hold.
	AFLike bool `json:"af_like"`
}

// AFLike reports whether a scored segment meets all three criteria under p.
// It lets a caller re-threshold stored segments without rescoring the beats,
// as long as SegmentBeats, Bins and Trim are unchanged.
func (p Params) AFLike(s Segment) bool {
	lo, hi := TurningPointBand(p.SegmentBeats, p.TPRBandSD)
	tp := float64(s.TurningPoints)
	return s.NRMSSD > p.NRMSSDMin && s.Entropy > p.EntropyMin && tp >= lo && tp <= hi
}

// Analyse splits rr (ms) into consecutive non-overlapping segments of
// SegmentBeats beats (a short tail is ignored) and scores each. The caller
// decides which beats are consecutive; a gap in the recording should split
// the series before it reaches Analyse. Invalid parameters give no segments,
// so call Validate first.
func Analyse(rr []float64, p Params) []Segment {
	return AppendAnalyse(nil, rr, p)
}

// AppendAnalyse is Analyse appending to dst, for callers that score many
// short runs of beats into one slice.
func AppendAnalyse(dst []Segment, rr []float64, p Params) []Segment {
	if p.Validate() != nil || len(rr) < p.SegmentBeats {
		return dst
	}
	m := p.SegmentBeats
	buf := make([]float64, m)
	counts := make([]int, p.Bins)
	lo, hi := TurningPointBand(m, p.TPRBandSD)
	for start := 0; start+m <= len(rr); start += m {
		seg := rr[start : start+m]
		s := Segment{
			Start:         start,
			NRMSSD:        NormalisedRMSSD(seg),
			Entropy:       entropy(seg, p.Bins, p.Trim, buf, counts, p.ExactBins),
			TurningPoints: TurningPoints(seg),
		}
		s.TPR = float64(s.TurningPoints) / float64(m-2)
		tp := float64(s.TurningPoints)
		s.AFLike = s.NRMSSD > p.NRMSSDMin && s.Entropy > p.EntropyMin && tp >= lo && tp <= hi
		dst = append(dst, s)
	}
	return dst
}

// Summary over all segments, for hints and per-week verdicts.
type Summary struct {
	// Segments is the number of scored segments.
	Segments int `json:"segments"`
	// AFLike is the number of segments meeting all three criteria.
	AFLike int `json:"af_like"`
	// MeanNRMSSD, MeanEntropy and MeanTPR average the segment metrics; 0
	// when there is no segment.
	MeanNRMSSD  float64 `json:"mean_nrmssd"`
	MeanEntropy float64 `json:"mean_entropy"`
	MeanTPR     float64 `json:"mean_tpr"`
}

// Summarise counts the AF-like segments and averages the three metrics; the
// means are 0 when there is no segment.
func Summarise(segs []Segment) Summary {
	var s Summary
	s.Segments = len(segs)
	if len(segs) == 0 {
		return s
	}
	for _, g := range segs {
		if g.AFLike {
			s.AFLike++
		}
		s.MeanNRMSSD += g.NRMSSD
		s.MeanEntropy += g.Entropy
		s.MeanTPR += g.TPR
	}
	n := float64(len(segs))
	s.MeanNRMSSD /= n
	s.MeanEntropy /= n
	s.MeanTPR /= n
	return s
}
