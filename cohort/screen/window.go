package screen

import (
	"cohortdesk/cohort"
)

// WindowSummary is what the readings of one window reduce to. Usability and
// irregularity are decided from it alone, so thresholds, gap limits, minimum
// counts and step limits can be changed (Sweep) without reading the readings
// again.
type WindowSummary struct {
	// SumAbs is the sum of |r_i - r_(i-1)| over successive readings inside
	// the window, in bpm. Integer, so the MASD is exact and reproducible.
	SumAbs int64
	// N is the number of readings inside the window.
	N int32
	// MaxGap is the largest time between successive readings inside the
	// window, in ms. The time from the window's start to its first reading,
	// and from its last reading to its end, is not a gap.
	MaxGap int32
	// Steps is the step count apportioned to the window: each steps interval
	// adds its count times the share of its duration that overlaps the
	// window; an interval of zero length counts in full where it starts.
	Steps float64
	// First and Last are the times of the window's first and last reading,
	// in ms from the window's start (both 0 without readings). The time the
	// readings cover is measured from them (Protocol.Revision 1).
	First, Last int32
}

// MASD is the mean absolute successive difference of the window in bpm; 0
// when it has fewer than two readings.
func (s WindowSummary) MASD() float64 {
	if s.N < 2 {
		return 0
	}
	return float64(s.SumAbs) / float64(s.N-1)
}

// WindowCount is the number of windows of the given minutes in [start, end).
// Windows are aligned to start; the last one is shorter when the week's length
// is not a multiple of the window (a week across a daylight-saving change).
func WindowCount(start, end int64, minutes int) int {
	if end <= start || minutes <= 0 {
		return 0
	}
	l := int64(minutes) * 60000
	return int((end - start + l - 1) / l)
}

// SummariseWindows reduces a cleaned week to one WindowSummary per window of
// the given minutes, appending into dst[:0] so callers can reuse the memory.
// Each reading belongs to the window containing its time (a reading exactly on
// a boundary starts the later window); pairs of readings in different windows
// contribute to neither. w.HR must be sorted by time (Clean does this);
// readings outside [w.Start, w.End) are ignored.
//
// This is the screen's hot path: one pass over the heart-rate readings with no
// allocation when dst has room, plus one pass over the step intervals.
func SummariseWindows(dst []WindowSummary, w *cohort.Week, minutes int) []WindowSummary {
	nw := WindowCount(w.Start, w.End, minutes)
	if cap(dst) < nw {
		dst = make([]WindowSummary, nw)
	} else {
		dst = dst[:nw]
		clear(dst)
	}
	if nw == 0 {
		return dst
	}
	l := int64(minutes) * 60000
	summariseHR(dst, w.HR.T, w.HR.V, w.Start, w.End, l)
	if len(w.Steps.End) > 0 {
		apportionSteps(dst, &w.Steps, w.Start, w.End, l)
	}
	return dst
}

// summariseHR is the inner loop. For each non-empty window it finds the
// window's end once, then runs over its readings with only a compare, a
// subtraction, a branch-free absolute value and a running maximum per
// reading.
func summariseHR(out []WindowSummary, t []int64, v []int32, start, end, l int64) {
	n := min(len(t), len(v))
	t, v = t[:n], v[:n]
	i := 0
	for i < n && t[i] < start {
		i++
	}
	for i < n && t[i] < end {
		wi := (t[i] - start) / l
		bound := min(start+(wi+1)*l, end) // the last window may be short
		prevT, prevV := t[i], v[i]
		var sum, maxGap int64
		j := i + 1
		for ; j < n; j++ {
			tj := t[j]
			if tj >= bound {
				break
			}
			vj := v[j]
			d := vj - prevV
			m := d >> 31
			sum += int64((d ^ m) - m)
			if g := tj - prevT; g > maxGap {
				maxGap = g
			}
			prevT, prevV = tj, vj
		}
		s := &out[wi]
		s.SumAbs = sum
		s.N = int32(j - i)
		s.MaxGap = int32(maxGap)
		ws := start + wi*l
		s.First, s.Last = int32(t[i]-ws), int32(prevT-ws)
		i = j
	}
}

// apportionSteps adds each steps interval to the windows it overlaps, in
// proportion to the overlap, so an hourly step total does not mark every
// five-minute window of that hour active.
func apportionSteps(out []WindowSummary, s *cohort.Samples, start, end, l int64) {
	n := min(len(s.T), len(s.V), len(s.End))
	nw := int64(len(out))
	for k := range n {
		t0, t1, c := s.T[k], s.End[k], s.V[k]
		if c <= 0 {
			continue
		}
		if t1 <= t0 {
			if t0 >= start && t0 < end {
				out[(t0-start)/l].Steps += float64(c)
			}
			continue
		}
		a, z := max(t0, start), min(t1, end)
		if z <= a {
			continue
		}
		dur := float64(t1 - t0)
		for wi := (a - start) / l; wi < nw; wi++ {
			ws := start + wi*l
			if ws >= z {
				break
			}
			we := min(ws+l, end)
			if ov := min(z, we) - max(a, ws); ov > 0 {
				// Multiply before dividing so an interval wholly inside one
				// window adds exactly its count.
				out[wi].Steps += float64(c) * float64(ov) / dur
			}
		}
	}
}
