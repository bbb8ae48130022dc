package ecg

import (
	"fmt"

	"cohortdesk/cohort/rr"
)

// minHintIntervals is the fewest RR intervals we score (ours): below 16 the
// entropy has fewer values than bins and the turning-point band is wider than
// the possible counts.
const minHintIntervals = 16

// hintParams adapts p to a strip: a 30 s strip at 75 bpm holds about 37
// intervals against the default segment of 128 beats, so a series shorter than
// one segment is scored as a single segment of its own length. It returns
// false when the series is too short or p is invalid.
func hintParams(n int, p rr.Params) (rr.Params, bool) {
	if p.Validate() != nil {
		return p, false
	}
	if n >= p.SegmentBeats {
		return p, true
	}
	if n < max(minHintIntervals, 2*p.Trim+2) {
		return p, false
	}
	p.SegmentBeats = n
	return p, p.Validate() == nil
}

// Hint scores an RR series (ms, e.g. Detection.RRms) with the beat-interval
// method of package rr. A series shorter than p.SegmentBeats but of at least
// 16 intervals is scored as one segment of its own length; a shorter one, or
// invalid parameters, give a Summary with no segments. The result is a hint
// for the over-reader, never a verdict.
func Hint(rrMs []float64, p rr.Params) rr.Summary {
	q, ok := hintParams(len(rrMs), p)
	if !ok {
		return rr.Summary{}
	}
	return rr.Summarise(rr.Analyse(rrMs, q))
}

// HintText is Hint in words for the over-read form, for example "Hint for the
// over-reader, not a verdict: RR irregular, AF-like (AF-like in 1 of 1 segment of 37
// beats): normalised RMSSD 0.18, entropy 0.81, turning-point ratio 0.66."
func HintText(rrMs []float64, p rr.Params) string {
	const lead = "Hint for the over-reader, not a verdict: "
	if err := p.Validate(); err != nil {
		return lead + "no RR hint, the beat-interval parameters are invalid (" + err.Error() + ")."
	}
	q, ok := hintParams(len(rrMs), p)
	if !ok {
		return fmt.Sprintf("%stoo few beats (%d RR intervals) to score RR irregularity.", lead, len(rrMs))
	}
	s := rr.Summarise(rr.Analyse(rrMs, q))
	var pattern string
	switch {
	case s.AFLike == 0:
		// Not "regular": an irregular rhythm other than AF (frequent early
		// beats, say) also fails the combined criteria.
		pattern = "RR not AF-like"
	case s.AFLike == s.Segments:
		pattern = "RR irregular, AF-like"
	default:
		pattern = "RR AF-like in part"
	}
	noun := "segments"
	if s.Segments == 1 {
		noun = "segment"
	}
	return fmt.Sprintf("%s%s (AF-like in %d of %d %s of %d beats): normalised RMSSD %.2f, entropy %.2f, turning-point ratio %.2f.",
		lead, pattern, s.AFLike, s.Segments, noun, q.SegmentBeats, s.MeanNRMSSD, s.MeanEntropy, s.MeanTPR)
}

// RecordingHint is the beat analysis kept with a recording: what the
// over-reader sees beside the strip. It is a hint, never a verdict. Its JSON
// is what the store keeps.
type RecordingHint struct {
	Text       string     `json:"text"`
	Summary    rr.Summary `json:"summary"`
	Params     rr.Params  `json:"params"`
	Beats      int        `json:"beats"`
	MeanHR     float64    `json:"mean_hr"`
	SearchBack int        `json:"search_back"`
	Warnings   []string   `json:"warnings,omitempty"`
}
