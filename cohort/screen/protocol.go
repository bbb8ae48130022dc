package screen

import (
	"fmt"
	"math"
	"strconv"
	"strings"

	"cohortdesk/cohort"
	"cohortdesk/cohort/rr"
)

// Protocol holds every parameter of the irregularity screen. Protocols are
// stored as JSON, one immutable version per change, so the JSON names are a
// stored format: add fields, never rename them.
//
// All defaults are illustrative choices of ours, NOT clinically validated, and
// must be shown as such wherever a protocol is displayed; the heart-rate bounds
// are common practice and the RR method's values are from memory of the
// published method (see package rr).
type Protocol struct {
	// MinBPM and MaxBPM bound plausible heart-rate readings; readings outside
	// are dropped and counted. RR intervals are held to the same bounds
	// converted to ms (60000/MaxBPM to 60000/MinBPM). Default 25-250 bpm
	// (common practice, no single source).
	MinBPM int32 `json:"min_bpm"`
	MaxBPM int32 `json:"max_bpm"`
	// Windows lists the window sizes screened, each with its own rules,
	// because what counts as a long run or an active window depends on the
	// window's length.
	Windows []WindowRule `json:"windows"`
	// MinWearHours is the usable wear a week needs before it can be called
	// positive or negative (see Result.WearHours). Default 24 h (ours,
	// illustrative).
	MinWearHours float64 `json:"min_wear_hours"`
	// RR configures the beat-interval method, used when a week has RR data.
	RR RRRule `json:"rr"`
	// Baseline configures thresholds relative to the participant's own first
	// weeks.
	Baseline BaselineRule `json:"baseline"`
	// Revision is the algorithm revision the protocol computes with. A
	// correction to how the screen computes changes results, so it reaches
	// them only through a protocol version that names the new revision:
	// every stored result recomputes exactly under its own version.
	//   - 0: the first screen. A usable window counts in full as wear;
	//     entropy bin edges are computed in floating point.
	//   - 1: usable wear is the time the readings cover (see
	//     WindowResult.UsableHours); entropy bins whole-millisecond
	//     intervals exactly (rr.Params.ExactBins).
	// Versions stored before revisions existed have none and read as 0.
	Revision int `json:"revision"`
}

// CurrentRevision is the newest algorithm revision, the one new protocols
// take.
const CurrentRevision = 1

// RRParams are the beat-interval parameters as the protocol's revision
// computes them: the one way to get parameters for rr.Analyse.
func (p Protocol) RRParams() rr.Params {
	q := p.RR.Params
	q.ExactBins = p.Revision >= 1
	return q
}

// WindowRule is the rule set of one window size. Windows are fixed and aligned
// to the week's start.
type WindowRule struct {
	// Minutes is the window length; 1 to 1440.
	Minutes int `json:"minutes"`
	// MASDThreshold: a usable window is irregular when its mean absolute
	// successive difference is at or above this, in bpm.
	MASDThreshold float64 `json:"masd_threshold"`
	// MaxGapSeconds: a window whose readings have a successive gap above this
	// is unusable (gappy), because MASD across a long gap mixes two moments
	// rather than measuring beat-to-beat variability.
	MaxGapSeconds int `json:"max_gap_seconds"`
	// MinReadings: a window needs at least this many readings (2 or more, as
	// MASD needs a difference) to be usable.
	MinReadings int `json:"min_readings"`
	// MaxSteps: a window with more steps than this overlapping it is active
	// and unusable, since exercise changes heart rate for ordinary reasons
	// (common practice to exclude it).
	MaxSteps int `json:"max_steps"`
	// RunLength: a week is positive when this many consecutive windows are
	// irregular; 0 turns the criterion off.
	RunLength int `json:"run_length"`
	// MinShare: a week is positive when at least this share (0-1) of its
	// usable windows of this size are irregular and those windows alone cover
	// MinWearHours; 0 turns the criterion off.
	MinShare float64 `json:"min_share"`
}

// RRRule configures the beat-interval method within a week. The embedded
// rr.Params appear inline in JSON ("rr": {"segment_beats": 128, ...}).
type RRRule struct {
	// Enabled turns the method on; it only contributes when RR data exist.
	Enabled bool `json:"enabled"`
	// MaxJoinErrorMs: beat i follows beat i-1 without a missed beat when the
	// time between them differs from interval i by at most this (ms). Larger
	// differences split the series, so segments never bridge a gap in the
	// recording. Default 50 ms (ours, illustrative).
	MaxJoinErrorMs int `json:"max_join_error_ms"`
	// MinAFLikeSegments is the number of AF-like segments that makes a week
	// positive. Default 3 (ours, illustrative).
	MinAFLikeSegments int `json:"min_af_like_segments"`
	rr.Params
}

// BaselineRule makes the window thresholds relative to the participant's own
// first weeks: threshold = max(absolute threshold, Factor x baseline level),
// where the baseline level of a window size is the median, over the
// participant's negative baseline weeks, of each week's median MASD of usable
// windows. Thresholds are only ever raised, so a baseline can quiet a
// participant whose ordinary heart rate is jumpy but can never make the screen
// more eager than the absolute protocol.
type BaselineRule struct {
	// Enabled turns personal baselines on.
	Enabled bool `json:"enabled"`
	// Weeks is K: study weeks 0..K-1 form the baseline. Default 2 (ours).
	Weeks int `json:"weeks"`
	// Factor multiplies the baseline level. Default 1.5 (ours, illustrative).
	Factor float64 `json:"factor"`
}

// DefaultProtocol returns the illustrative defaults. None of these values is
// clinically validated; a study must choose and justify its own.
func DefaultProtocol() Protocol {
	return Protocol{
		MinBPM: 25,  // common practice, no single source
		MaxBPM: 250, // common practice, no single source
		Windows: []WindowRule{
			// ours, illustrative: dense readings (exercise-rate sampling or
			// continuous modes) are needed to judge a 5-minute window.
			{Minutes: 5, MASDThreshold: 8, MaxGapSeconds: 60, MinReadings: 5, MaxSteps: 50, RunLength: 6, MinShare: 0.10},
			// ours, illustrative: at-rest sampling every few minutes (gaps up
			// to 15 minutes) fills a 30-minute window with 3 or more readings.
			// The threshold (9 bpm) and run (3 windows, 90 minutes) were picked
			// on our own synthetic demo cohort so that its few AF weeks flag and
			// ordinary weeks mostly do not; that says nothing about real people.
			{Minutes: 30, MASDThreshold: 9, MaxGapSeconds: 900, MinReadings: 3, MaxSteps: 300, RunLength: 3, MinShare: 0.10},
		},
		MinWearHours: 24, // ours, illustrative
		RR: RRRule{
			Enabled:           true,
			MaxJoinErrorMs:    50, // ours, illustrative
			MinAFLikeSegments: 3,  // ours, illustrative
			Params:            rr.DefaultParams(),
		},
		Baseline: BaselineRule{Enabled: false, Weeks: 2, Factor: 1.5}, // ours, illustrative
		Revision: CurrentRevision,
	}
}

// Limits that keep a stored protocol computable in bounded memory and time.
const (
	maxWindowRules  = 8
	maxWindowMin    = 1440
	maxJoinErrorMs  = 2000
	maxBaselineWeek = 52
	// MaxWeekMs bounds the length of a participant-week the screen accepts:
	// 8 days covers a week across a daylight-saving change with room to spare.
	MaxWeekMs = 8 * 24 * 3600 * 1000
)

// Validate checks every field and reports all problems at once as a
// *cohort.ValidationError keyed by JSON field path ("windows[1].min_readings").
func (p Protocol) Validate() error {
	var e cohort.ValidationError
	if p.MinBPM < 1 {
		e.Add("min_bpm", "must be at least 1 bpm")
	}
	if p.MaxBPM <= p.MinBPM {
		e.Add("max_bpm", "must be above min_bpm")
	} else if p.MaxBPM > 400 {
		e.Add("max_bpm", "must be at most 400 bpm")
	}
	if len(p.Windows) == 0 && !p.RR.Enabled {
		e.Add("windows", "needs at least one window size when the RR method is off")
	}
	if len(p.Windows) > maxWindowRules {
		e.Add("windows", fmt.Sprintf("at most %d window sizes", maxWindowRules))
	}
	canFlag := p.RR.Enabled
	seen := map[int]int{}
	for i, w := range p.Windows {
		f := func(name string) string { return fmt.Sprintf("windows[%d].%s", i, name) }
		if w.Minutes < 1 || w.Minutes > maxWindowMin {
			e.Add(f("minutes"), fmt.Sprintf("must be between 1 and %d minutes", maxWindowMin))
		} else if j, dup := seen[w.Minutes]; dup {
			e.Add(f("minutes"), fmt.Sprintf("repeats the window size of windows[%d]", j))
		} else {
			seen[w.Minutes] = i
		}
		if !finite(w.MASDThreshold) || w.MASDThreshold <= 0 {
			e.Add(f("masd_threshold"), "must be a finite number of bpm above 0")
		}
		if w.MaxGapSeconds < 1 {
			e.Add(f("max_gap_seconds"), "must be at least 1 second")
		} else if w.Minutes >= 1 && w.MaxGapSeconds > w.Minutes*60 {
			e.Add(f("max_gap_seconds"), "must not exceed the window length")
		}
		if w.MinReadings < 2 {
			e.Add(f("min_readings"), "must be at least 2 (a difference needs two readings)")
		}
		if w.MaxSteps < 0 {
			e.Add(f("max_steps"), "must not be negative")
		}
		if w.RunLength < 0 {
			e.Add(f("run_length"), "must not be negative (0 turns the run criterion off)")
		} else if w.Minutes >= 1 && w.RunLength > 7*24*60/w.Minutes {
			e.Add(f("run_length"), "is longer than a week of windows")
		}
		if !finite(w.MinShare) || w.MinShare < 0 || w.MinShare > 1 {
			e.Add(f("min_share"), "must be between 0 and 1 (0 turns the share criterion off)")
		}
		if w.RunLength > 0 || w.MinShare > 0 {
			canFlag = true
		}
	}
	if !canFlag {
		e.Add("windows", "no criterion can make a week positive: set a run_length or min_share, or turn the RR method on")
	}
	if !finite(p.MinWearHours) || p.MinWearHours <= 0 || p.MinWearHours > 7*24 {
		e.Add("min_wear_hours", "must be above 0 and at most 168 hours")
	}
	if p.RR.MaxJoinErrorMs < 0 || p.RR.MaxJoinErrorMs > maxJoinErrorMs {
		e.Add("rr.max_join_error_ms", fmt.Sprintf("must be between 0 and %d ms", maxJoinErrorMs))
	}
	if p.RR.MinAFLikeSegments < 1 {
		e.Add("rr.min_af_like_segments", "must be at least 1")
	}
	p.RR.Params.ValidateInto(&e, "rr.")
	if p.Baseline.Weeks < 1 || p.Baseline.Weeks > maxBaselineWeek {
		e.Add("baseline.weeks", fmt.Sprintf("must be between 1 and %d weeks", maxBaselineWeek))
	}
	if !finite(p.Baseline.Factor) || p.Baseline.Factor <= 0 {
		e.Add("baseline.factor", "must be a finite number above 0")
	}
	if p.Revision < 0 || p.Revision > CurrentRevision {
		e.Add("revision", fmt.Sprintf("must be an algorithm revision from 0 to %d (see the protocol notes)", CurrentRevision))
	}
	return e.Err()
}

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

// Change is one field that differs between two protocol versions, for an
// admin page that shows what a new version changes.
type Change struct {
	Field string `json:"field"` // JSON path, e.g. "windows[0].masd_threshold"
	Old   string `json:"old"`   // "(none)" when the field did not exist
	New   string `json:"new"`   // "(none)" when the field no longer exists
}

// Absent marks the side of a Change where the field does not exist, e.g. a
// window size added or removed.
const Absent = "(none)"

// Diff lists the fields whose values differ from p (old) to other (new), in
// the order fields appear in p, then fields only in other. It compares
// Params, so fields added later are covered without edits here.
func (p Protocol) Diff(other Protocol) []Change {
	a, b := p.Params(), other.Params()
	bm := make(map[string]string, len(b))
	for _, kv := range b {
		bm[kv.Path] = kv.Value
	}
	am := make(map[string]bool, len(a))
	var out []Change
	for _, kv := range a {
		am[kv.Path] = true
		nv, ok := bm[kv.Path]
		if !ok {
			out = append(out, Change{Field: kv.Path, Old: kv.Value, New: Absent})
		} else if nv != kv.Value {
			out = append(out, Change{Field: kv.Path, Old: kv.Value, New: nv})
		}
	}
	for _, kv := range b {
		if !am[kv.Path] {
			out = append(out, Change{Field: kv.Path, Old: Absent, New: kv.Value})
		}
	}
	return out
}

// Sweepable lists the parameters Sweep can vary, as JSON paths; "windows[i]"
// stands for any window index. These are the parameters decided from window
// summaries and scored RR segments alone. Window minutes, the bpm bounds,
// rr.segment_beats, rr.bins, rr.trim and rr.max_join_error_ms change the
// summaries or the cleaning themselves and need a fresh Prepare per value.
var Sweepable = []string{
	"min_wear_hours",
	"windows[i].masd_threshold",
	"windows[i].max_gap_seconds",
	"windows[i].min_readings",
	"windows[i].max_steps",
	"windows[i].run_length",
	"windows[i].min_share",
	"rr.nrmssd_min",
	"rr.entropy_min",
	"rr.tpr_band_sd",
	"rr.min_af_like_segments",
	"baseline.factor",
}

// With returns a copy of p with one sweepable parameter set to value. Integer
// parameters need an integral value. The copy is not validated.
func (p Protocol) With(param string, value float64) (Protocol, error) {
	q := p
	q.Windows = append([]WindowRule(nil), p.Windows...)
	asInt := func() (int, error) {
		if value != math.Trunc(value) || math.Abs(value) > 1e9 {
			return 0, fmt.Errorf("screen: parameter %s: value %v is not a whole number", param, value)
		}
		return int(value), nil
	}
	if rest, ok := strings.CutPrefix(param, "windows["); ok {
		idx, field, ok := strings.Cut(rest, "].")
		i, err := strconv.Atoi(idx)
		if !ok || err != nil || i < 0 || i >= len(q.Windows) {
			return p, fmt.Errorf("screen: parameter %s: no such window (the protocol has %d)", param, len(q.Windows))
		}
		w := &q.Windows[i]
		switch field {
		case "masd_threshold":
			w.MASDThreshold = value
		case "min_share":
			w.MinShare = value
		case "max_gap_seconds", "min_readings", "max_steps", "run_length":
			n, err := asInt()
			if err != nil {
				return p, err
			}
			switch field {
			case "max_gap_seconds":
				w.MaxGapSeconds = n
			case "min_readings":
				w.MinReadings = n
			case "max_steps":
				w.MaxSteps = n
			case "run_length":
				w.RunLength = n
			}
		default:
			return p, fmt.Errorf("screen: parameter %s cannot be swept (sweepable: %s)", param, strings.Join(Sweepable, ", "))
		}
		return q, nil
	}
	switch param {
	case "min_wear_hours":
		q.MinWearHours = value
	case "rr.nrmssd_min":
		q.RR.NRMSSDMin = value
	case "rr.entropy_min":
		q.RR.EntropyMin = value
	case "rr.tpr_band_sd":
		q.RR.TPRBandSD = value
	case "rr.min_af_like_segments":
		n, err := asInt()
		if err != nil {
			return p, err
		}
		q.RR.MinAFLikeSegments = n
	case "baseline.factor":
		q.Baseline.Factor = value
	default:
		return p, fmt.Errorf("screen: parameter %s cannot be swept (sweepable: %s)", param, strings.Join(Sweepable, ", "))
	}
	return q, nil
}

// VersionLabel names one stored version of a protocol as every page, CSV and
// summary writes it: its name and version number ("standard v3").
func VersionLabel(name string, version int) string {
	return name + " v" + strconv.Itoa(version)
}
