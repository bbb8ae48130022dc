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

// HintPattern is the hint's reading of a rhythm, in the stored words of a
// recording's analysis.
type HintPattern string

// The hint's readings of the intervals between normal beats.
const (
	// HintAFLike: every scored segment is AF-like: irregularly irregular.
	HintAFLike HintPattern = "af_like"
	// HintAFLikeInPart: some scored segments are AF-like, some are not.
	HintAFLikeInPart HintPattern = "af_like_in_part"
	// HintPremature: premature beats were found and what is left is not
	// AF-like (or too short to score): the irregularity comes from them.
	HintPremature HintPattern = "premature"
	// HintNotAFLike: no segment is AF-like and no premature beat was found.
	HintNotAFLike HintPattern = "not_af_like"
	// HintTooFew: too few intervals to score.
	HintTooFew HintPattern = "too_few"
	// HintInvalid: the beat-interval parameters are invalid.
	HintInvalid HintPattern = "invalid"
)

// hintLead begins every hint, so no reader takes it for a verdict.
const hintLead = "Hint for the over-reader, not a verdict: "

// HintText is Hint in words for the over-read form, for example "Hint for
// the over-reader, not a verdict: RR irregularly irregular, AF-like
// (AF-like in 1 of 1 segment of 37 beats): normalised RMSSD 0.18, entropy
// 0.81, turning-point ratio 0.66." It reads rrMs as intervals between
// normal beats; Analyse also leaves out the intervals around premature
// beats first.
func HintText(rrMs []float64, p rr.Params) string {
	return scoreHint(rrMs, 0, p).Text
}

// scoreHint scores the intervals between normal beats (nn, ms) after
// premature beats were found and the intervals around them left out, and
// words the result. Premature beats turn "not AF-like" into "irregular from
// N premature beats, not AF-like"; they never make a rhythm AF-like.
func scoreHint(nn []float64, premature int, p rr.Params) RecordingHint {
	h := RecordingHint{Params: p, Intervals: len(nn)}
	if err := p.Validate(); err != nil {
		h.Pattern = HintInvalid
		h.Text = hintLead + "no RR hint, the beat-interval parameters are invalid (" + err.Error() + ")."
		return h
	}
	beats := "beats"
	if premature == 1 {
		beats = "beat"
	}
	q, ok := hintParams(len(nn), p)
	if !ok {
		if premature > 0 {
			h.Pattern = HintPremature
			h.Text = fmt.Sprintf("%sRR irregular from %d premature %s, not AF-like: %d intervals between normal beats are left, too few to score.",
				hintLead, premature, beats, len(nn))
			return h
		}
		h.Pattern = HintTooFew
		h.Text = fmt.Sprintf("%stoo few beats (%d RR intervals) to score RR irregularity.", hintLead, len(nn))
		return h
	}
	s := rr.Summarise(rr.Analyse(nn, q))
	h.Summary = s
	var pattern string
	switch {
	case s.AFLike == 0 && premature > 0:
		h.Pattern, pattern = HintPremature, fmt.Sprintf("RR irregular from %d premature %s, not AF-like", premature, beats)
	case s.AFLike == 0:
		// Not "regular": an irregular rhythm other than AF also fails the
		// combined criteria.
		h.Pattern, pattern = HintNotAFLike, "RR not AF-like"
	case s.AFLike == s.Segments:
		h.Pattern, pattern = HintAFLike, "RR irregularly irregular, AF-like"
	default:
		h.Pattern, pattern = HintAFLikeInPart, "RR AF-like in part"
	}
	noun := "segments"
	if s.Segments == 1 {
		noun = "segment"
	}
	h.Text = fmt.Sprintf("%s%s (AF-like in %d of %d %s of %d beats): normalised RMSSD %.2f, entropy %.2f, turning-point ratio %.2f.",
		hintLead, pattern, s.AFLike, s.Segments, noun, q.SegmentBeats, s.MeanNRMSSD, s.MeanEntropy, s.MeanTPR)
	if premature > 0 {
		h.Text += fmt.Sprintf(" The intervals around %d premature %s were left out.", premature, beats)
	}
	return h
}

// RecordingHint is the beat analysis kept with a recording: what the
// over-reader sees beside the strip. It is a hint, never a verdict. Its JSON
// is what the store keeps; recordings stored before signal quality and
// premature beats were checked have no Pattern, Quality or Premature.
type RecordingHint struct {
	Text       string     `json:"text"`
	Summary    rr.Summary `json:"summary"`
	Params     rr.Params  `json:"params"`
	Beats      int        `json:"beats"`
	MeanHR     float64    `json:"mean_hr"`
	SearchBack int        `json:"search_back"`
	Warnings   []string   `json:"warnings,omitempty"`
	// Pattern is the hint's reading in stored words.
	Pattern HintPattern `json:"pattern,omitempty"`
	// Quality holds the unusable stretches and the usable length.
	Quality *Quality `json:"quality,omitempty"`
	// Premature lists the premature beats as indices into the beats.
	Premature []int `json:"premature,omitempty"`
	// Intervals is the number of intervals between normal beats scored.
	Intervals int `json:"intervals,omitempty"`
}
