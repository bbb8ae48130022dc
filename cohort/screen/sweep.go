package screen

import (
	"fmt"
	"math"
	"strconv"
	"strings"

	"cohortdesk/cohort"
)

// MaxSweepValues bounds the values of one threshold sweep.
const MaxSweepValues = 50

// CheckSweep refuses a sweep that cannot run: no values or too many, a value
// that is not a finite number, a parameter the protocol does not have or that
// cannot be swept, or a value that makes the protocol invalid. The refusal is
// a *cohort.ValidationError whose fields are the sweep form's: "param" and
// "values".
func CheckSweep(p Protocol, param string, values []float64) error {
	var ve cohort.ValidationError
	if len(values) == 0 || len(values) > MaxSweepValues {
		ve.Add("values", fmt.Sprintf("give 1 to %d values", MaxSweepValues))
	}
	for _, v := range values {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			ve.Add("values", "every value must be a finite number")
			break
		}
		q, err := p.With(param, v)
		if err != nil {
			ve.Add("param", err.Error())
			break
		}
		if err := q.Validate(); err != nil {
			ve.Add("values", fmt.Sprintf("%s = %v makes an invalid protocol: %v", param, v, err))
			break
		}
	}
	return ve.Err()
}

// SweepValues spreads steps values evenly from from to to, rounded to 6
// significant digits (whole numbers for integer parameters), without repeats.
func SweepValues(from, to float64, steps int, integer bool) []float64 {
	var out []float64
	for i := range steps {
		v := from
		if steps > 1 {
			v = from + (to-from)*float64(i)/float64(steps-1)
		}
		if integer {
			v = math.Round(v)
		} else if v != 0 {
			mag := math.Pow(10, 5-math.Floor(math.Log10(math.Abs(v))))
			v = math.Round(v*mag) / mag
		}
		if len(out) == 0 || out[len(out)-1] != v {
			out = append(out, v)
		}
	}
	return out
}

// Sweep recomputes the verdict of every prepared week for each value of one
// parameter, for a threshold sweep: out[v][w] is the verdict of weeks[w]
// with param set to values[v]. param is a JSON path from Sweepable (with a
// real window index, e.g. "windows[0].masd_threshold"). bases is nil or holds
// one baseline (or nil) per week. The readings are never touched again: each
// value costs one pass over the window summaries, a few thousand per week.
// Every swept protocol must validate; the first that does not is an error
// naming the value.
func Sweep(weeks []*Prepared, bases []*Baseline, p Protocol, param string, values []float64) ([][]Verdict, error) {
	if bases != nil && len(bases) != len(weeks) {
		return nil, fmt.Errorf("screen: sweep: %d baselines for %d weeks", len(bases), len(weeks))
	}
	protocols := make([]Protocol, len(values))
	out := make([][]Verdict, len(values))
	for vi, v := range values {
		q, err := p.With(param, v)
		if err != nil {
			return nil, err
		}
		if err := q.Validate(); err != nil {
			return nil, fmt.Errorf("screen: sweep: %s = %v: %w", param, v, err)
		}
		protocols[vi] = q
		out[vi] = make([]Verdict, len(weeks))
	}
	// Weeks outside, values inside: one week's summaries stay in cache while
	// every value is tried on them.
	for wi, pr := range weeks {
		var b *Baseline
		if bases != nil {
			b = bases[wi]
		}
		for vi, q := range protocols {
			res, err := evaluate(pr, q, b, false)
			if err != nil {
				return nil, fmt.Errorf("screen: sweep: %s = %v: %w", param, values[vi], err)
			}
			out[vi][wi] = res.Verdict
		}
	}
	return out, nil
}

// SweepParam is one parameter a sweep can vary.
type SweepParam struct {
	Path   string // JSON path with a real window index, e.g. "windows[0].masd_threshold"
	Window int    // the index into Protocol.Windows, -1 for a protocol-wide parameter
}

// SweepParams lists the parameters of p a sweep can vary, in Sweepable's
// order, each window-level parameter given for every window of p.
func SweepParams(p Protocol) []SweepParam {
	var out []SweepParam
	for _, sp := range Sweepable {
		if !strings.Contains(sp, "windows[i]") {
			out = append(out, SweepParam{Path: sp, Window: -1})
			continue
		}
		for i := range p.Windows {
			out = append(out, SweepParam{Path: strings.Replace(sp, "windows[i]", "windows["+strconv.Itoa(i)+"]", 1), Window: i})
		}
	}
	return out
}
