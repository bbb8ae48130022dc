package screen

import (
	"fmt"
	"strconv"
	"strings"
)

// The words of the protocol's parameters, defined once beside Protocol: the
// protocol pages, the threshold sweep, its chart, its job and the audit
// trail use them, never the JSON paths, which stay the stored names.

// paramLabels say in a sentence what each parameter does, keyed by its path
// or by the last part of its path.
var paramLabels = map[string]string{
	"min_bpm":              "Lowest plausible heart rate (bpm)",
	"max_bpm":              "Highest plausible heart rate (bpm)",
	"min_wear_hours":       "Usable wear a week needs before it is called (hours)",
	"minutes":              "Window length (minutes)",
	"masd_threshold":       "Irregular when the mean absolute successive difference is at least (bpm)",
	"max_gap_seconds":      "Longest gap between readings in a usable window (seconds)",
	"min_readings":         "Fewest readings in a usable window",
	"max_steps":            "Most steps in a usable window",
	"run_length":           "Positive after this many irregular windows in a row (0 turns it off)",
	"min_share":            "Positive when at least this share of usable windows is irregular (0 to 1; 0 turns it off)",
	"rr.enabled":           "Use beat-to-beat (RR) intervals when the watch supplies them",
	"max_join_error_ms":    "Largest timing mismatch that still joins two beats (ms)",
	"min_af_like_segments": "Positive after this many AF-like beat segments",
	"segment_beats":        "Beats per segment",
	"nrmssd_min":           "AF-like when normalised RMSSD is above",
	"entropy_min":          "AF-like when normalised Shannon entropy is above",
	"bins":                 "Bins for the entropy",
	"trim":                 "Shortest and longest intervals dropped before the entropy (each)",
	"tpr_band_sd":          "AF-like when turning points lie within this many SD of a random series",
	"baseline.enabled":     "Raise thresholds to the participant's own first weeks",
	"weeks":                "Baseline weeks (K)",
	"factor":               "Threshold is at least this multiple of the baseline level",
}

// paramNames are short names of the sweepable parameters, for titles,
// axes and lists, with their unit.
var paramNames = map[string]string{
	"min_wear_hours":          "usable wear needed (hours)",
	"masd_threshold":          "MASD threshold (bpm)",
	"max_gap_seconds":         "longest gap in a window (s)",
	"min_readings":            "fewest readings in a window",
	"max_steps":               "most steps in a window",
	"run_length":              "run of irregular windows that flags",
	"min_share":               "share of irregular windows that flags",
	"rr.nrmssd_min":           "RR: normalised RMSSD above",
	"rr.entropy_min":          "RR: entropy above",
	"rr.tpr_band_sd":          "RR: turning-point band (SD)",
	"rr.min_af_like_segments": "RR: AF-like segments that flag",
	"baseline.factor":         "baseline factor",
}

// ParamLabel says in a sentence what the parameter at path does; an unknown
// path is returned as it is.
func ParamLabel(path string) string {
	if l, ok := paramLabels[path]; ok {
		return l
	}
	if l, ok := paramLabels[path[strings.LastIndex(path, ".")+1:]]; ok {
		return l
	}
	return path
}

// ParamName is the short name of the parameter at path in p, with its window
// size for a window's parameter: "MASD threshold (bpm), 30-minute windows".
// A path with no short name takes its label.
func (p Protocol) ParamName(path string) string {
	rest, window := path, ""
	if r, ok := strings.CutPrefix(path, "windows["); ok {
		idx, field, ok := strings.Cut(r, "].")
		if i, err := strconv.Atoi(idx); ok && err == nil {
			rest = field
			if i >= 0 && i < len(p.Windows) {
				window = fmt.Sprintf(", %d-minute windows", p.Windows[i].Minutes)
			} else {
				window = fmt.Sprintf(", window size %d", i+1)
			}
		}
	}
	if n, ok := paramNames[rest]; ok {
		return n + window
	}
	return ParamLabel(path) + window
}
