package ecg

import (
	"math"
	"slices"
)

// Premature beats (ectopic beats) make the beat intervals irregular without
// atrial fibrillation: a beat comes early and a pause follows it. Interval
// methods for AF leave the intervals around such beats out before they
// score a series; only intervals between two normal beats (NN intervals, in
// the vocabulary of the Task Force of the ESC and NASPE, Circulation
// 1996;93:1043-65) are kept. Dash S et al. 2009 (the method of package rr)
// describe such an ectopic-beat step before their three measures; we have
// not read their rule and do not copy it (from memory): ours is below.
//
// A beat is premature when it comes early, at most 85% of the local cycle
// after the beat before it, and either
//   - its QRS differs from the dominant beat shape (correlation under 0.8
//     with the median shape of the recording's dominant beats: a premature
//     ventricular beat, wide and of another form), or
//   - a compensatory pause follows it (the next interval at least 110% of
//     the cycle) in a regular rhythm (at least 70% of the neighbouring
//     intervals within 15% of the cycle): a premature atrial beat, whose
//     QRS looks like the others.
//
// The local cycle is the median of up to eight intervals either side,
// leaving out the two around the beat itself; in bigeminy, half short and
// half long, it falls between the two. The figures are ours, set on the
// coupling of textbook premature beats (40-85% of the cycle) and on
// synthetic recordings. In atrial fibrillation early beats followed by
// long intervals are common, but the rhythm is not regular and the QRS
// keeps its shape, so they stay in.
const (
	earlyShare       = 0.85
	pauseShare       = 1.10
	shapeCorrelation = 0.80
	dominantCorr     = 0.90
	regularShare     = 0.70
	regularBand      = 0.15
	cycleNeighbours  = 8
	// The QRS window compared: 100 ms either side of the R peak (ours:
	// wide enough for a premature ventricular beat's 120-160 ms QRS).
	shapeSeconds = 0.100
)

// Ectopy is what FindPremature learns about the beats of a recording.
type Ectopy struct {
	// Premature lists the premature beats as indices into the beats given.
	Premature []int
	// Dominant is the number of beats that match the dominant shape.
	Dominant int
	// Excluded marks, for every interval i (from beat i to beat i+1), that
	// it is left out of the interval metrics: it ends or starts at a
	// premature beat.
	Excluded []bool
}

// FindPremature finds the premature beats among beats (sample indices into
// w, in order) whose intervals are given in ms (rrMs[i] from beat i to beat
// i+1; a NaN interval spans a gap in the usable signal and is neither
// scored nor used as a neighbour).
func FindPremature(w Waveform, beats []int, rrMs []float64) Ectopy {
	n := len(beats)
	e := Ectopy{Excluded: make([]bool, max(0, n-1))}
	if n < 3 {
		return e
	}
	corr := shapeCorrelations(w, beats, rrMs)
	for _, c := range corr {
		if c >= dominantCorr {
			e.Dominant++
		}
	}
	for k := 1; k < n; k++ {
		before := rrMs[k-1]
		if math.IsNaN(before) {
			continue
		}
		after := math.NaN()
		if k < n-1 {
			after = rrMs[k]
		}
		cycle, regular, ok := localCycle(rrMs, k)
		if !ok || before > earlyShare*cycle {
			continue
		}
		differs := corr[k] < shapeCorrelation
		pause := !math.IsNaN(after) && after >= pauseShare*cycle
		if !differs && !(pause && regular) {
			continue
		}
		e.Premature = append(e.Premature, k)
		e.Excluded[k-1] = true
		if k < n-1 {
			e.Excluded[k] = true
		}
	}
	return e
}

// localCycle is the median of up to cycleNeighbours intervals on each side
// of beat k, leaving out the intervals that end and start at beat k and
// any across a gap, and whether that neighbourhood is regular.
func localCycle(rrMs []float64, k int) (cycle float64, regular, ok bool) {
	var nb []float64
	for i, taken := k-2, 0; i >= 0 && taken < cycleNeighbours; i-- {
		if !math.IsNaN(rrMs[i]) {
			nb = append(nb, rrMs[i])
			taken++
		}
	}
	for i, taken := k+1, 0; i < len(rrMs) && taken < cycleNeighbours; i++ {
		if !math.IsNaN(rrMs[i]) {
			nb = append(nb, rrMs[i])
			taken++
		}
	}
	if len(nb) < 4 {
		return 0, false, false
	}
	cycle = median(nb)
	within := 0
	for _, v := range nb {
		if math.Abs(v-cycle) <= regularBand*cycle {
			within++
		}
	}
	return cycle, float64(within) >= regularShare*float64(len(nb)), true
}

// shapeCorrelations correlates each beat's QRS (the signal within
// shapeSeconds of the R peak, low-passed at 40 Hz, its mean removed) with
// the dominant shape: the sample-wise median of the beats that did not come
// early, refined once on the beats that match it.
func shapeCorrelations(w Waveform, beats []int, rrMs []float64) []float64 {
	fs := w.RateHz
	half := max(2, int(math.Round(shapeSeconds*fs)))
	x := smooth(w.Samples, fs)
	shapes := make([][]float64, len(beats))
	for k, b := range beats {
		v := make([]float64, 2*half+1)
		for j := range v {
			i := min(max(b-half+j, 0), len(x)-1)
			v[j] = x[i]
		}
		m := 0.0
		for _, y := range v {
			m += y
		}
		m /= float64(len(v))
		for j := range v {
			v[j] -= m
		}
		shapes[k] = v
	}
	// First template: beats that did not come early against the median
	// interval of the recording.
	var valid []float64
	for _, v := range rrMs {
		if !math.IsNaN(v) {
			valid = append(valid, v)
		}
	}
	med := 0.0
	if len(valid) > 0 {
		med = median(valid)
	}
	var pick []int
	for k := range beats {
		if k == 0 || math.IsNaN(rrMs[k-1]) || rrMs[k-1] >= 0.9*med {
			pick = append(pick, k)
		}
	}
	if len(pick) == 0 {
		for k := range beats {
			pick = append(pick, k)
		}
	}
	tmpl := medianShape(shapes, pick)
	corr := make([]float64, len(beats))
	for round := 0; round < 2; round++ {
		for k, v := range shapes {
			corr[k] = pearson(v, tmpl)
		}
		if round == 1 {
			break
		}
		var dom []int
		for k, c := range corr {
			if c >= dominantCorr {
				dom = append(dom, k)
			}
		}
		if len(dom) < 3 {
			break
		}
		tmpl = medianShape(shapes, dom)
	}
	return corr
}

// medianShape is the sample-wise median of the shapes picked.
func medianShape(shapes [][]float64, pick []int) []float64 {
	m := len(shapes[0])
	out := make([]float64, m)
	col := make([]float64, len(pick))
	for j := range out {
		for i, k := range pick {
			col[i] = shapes[k][j]
		}
		slices.Sort(col)
		h := len(col) / 2
		if len(col)%2 == 1 {
			out[j] = col[h]
		} else {
			out[j] = (col[h-1] + col[h]) / 2
		}
	}
	return out
}

// pearson is the correlation coefficient of two vectors of one length; 0
// when either is constant.
func pearson(a, b []float64) float64 {
	var ma, mb float64
	for i := range a {
		ma += a[i]
		mb += b[i]
	}
	ma /= float64(len(a))
	mb /= float64(len(b))
	var ab, aa, bb float64
	for i := range a {
		da, db := a[i]-ma, b[i]-mb
		ab += da * db
		aa += da * da
		bb += db * db
	}
	if aa == 0 || bb == 0 {
		return 0
	}
	return ab / math.Sqrt(aa*bb)
}
