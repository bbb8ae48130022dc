package screen

import (
	"fmt"
	"reflect"
	"strconv"
	"strings"
)

// Param is one value of a protocol, named by its JSON path ("min_bpm",
// "windows[1].min_share", "rr.segment_beats"): the path Validate names in its
// messages, Diff in its changes and a sweep in its parameter, so a page can
// put each beside its own input.
type Param struct {
	Path  string
	Kind  string // "int", "float" or "bool"
	Value string // formatted as stored: decimal integers, shortest floats, true or false
}

// Params lists every value of p in stored field order. It walks the struct
// through its JSON tags, inlining embedded structs as encoding/json does, so
// fields added to the protocol later are listed without edits here.
func (p Protocol) Params() []Param {
	var out []Param
	walkParams(reflect.ValueOf(p), "", &out)
	return out
}

func walkParams(v reflect.Value, path string, out *[]Param) {
	switch v.Kind() {
	case reflect.Struct:
		t := v.Type()
		for i := range t.NumField() {
			sf := t.Field(i)
			if !sf.IsExported() {
				continue
			}
			name, _, _ := strings.Cut(sf.Tag.Get("json"), ",")
			if name == "-" {
				continue
			}
			if sf.Anonymous && name == "" {
				walkParams(v.Field(i), path, out) // inline, as encoding/json does
				continue
			}
			if name == "" {
				name = sf.Name
			}
			child := name
			if path != "" {
				child = path + "." + name
			}
			walkParams(v.Field(i), child, out)
		}
	case reflect.Slice, reflect.Array:
		for i := range v.Len() {
			walkParams(v.Index(i), fmt.Sprintf("%s[%d]", path, i), out)
		}
	case reflect.Bool:
		*out = append(*out, Param{Path: path, Kind: "bool", Value: strconv.FormatBool(v.Bool())})
	case reflect.Int, reflect.Int8, reflect.Int16, reflect.Int32, reflect.Int64:
		*out = append(*out, Param{Path: path, Kind: "int", Value: strconv.FormatInt(v.Int(), 10)})
	case reflect.Float32, reflect.Float64:
		*out = append(*out, Param{Path: path, Kind: "float", Value: strconv.FormatFloat(v.Float(), 'g', -1, 64)})
	default:
		panic(fmt.Sprintf("screen: protocol parameter %s has kind %s; give Params a case for it", path, v.Kind()))
	}
}

// paramLabels are the words shown beside each parameter, keyed by its path
// or, for window and RR parameters, by the last part of it.
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
	"revision":             "Algorithm revision (0: whole usable windows count as wear, entropy bins in floating point; 1: wear is the time readings cover, exact entropy bins)",
}

// ParamLabel words a parameter path for pages (the protocol form, a
// version's differences, the threshold sweep); an unknown path is shown as
// it is.
func ParamLabel(path string) string {
	if l, ok := paramLabels[path]; ok {
		return l
	}
	last := path[strings.LastIndex(path, ".")+1:]
	if l, ok := paramLabels[last]; ok {
		return l
	}
	return path
}

// Label words a sweepable parameter of p, naming the window size of a
// window-level one ("15-minute windows: ...").
func (sp SweepParam) Label(p Protocol) string {
	label := ParamLabel(sp.Path)
	if sp.Window >= 0 && sp.Window < len(p.Windows) {
		label = fmt.Sprintf("%d-minute windows: %s", p.Windows[sp.Window].Minutes, label)
	}
	return label
}
