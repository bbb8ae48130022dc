package screen

import (
	"fmt"
	"strconv"
	"strings"
)

// The short names of the sweepable parameters, beside their labels
// (params.go): the threshold sweep, its chart, its job and its list name a
// parameter by them, never by its JSON path, which stays the stored name.

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
