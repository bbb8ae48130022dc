package ecg

import (
	"fmt"
	"math"
	"slices"
)

// Artefact is why a stretch of a recording cannot be used for beat
// detection. Stored as text in a recording's analysis, so the values never
// change.
type Artefact string

// The kinds of unusable stretch, tested in this order.
const (
	// LeadOff: the recorder marked the samples as missing, or the baseline
	// left the range a skin electrode can see.
	LeadOff Artefact = "lead_off"
	// Saturated: the signal sat at the digital limit of the recorder.
	Saturated Artefact = "saturated"
	// Flat: no activity at all, not even the P and T waves of a pause.
	Flat Artefact = "flat"
	// Noise: the QRS band holds noise, not distinct complexes.
	Noise Artefact = "noise"
	// Short: a usable piece between two artefacts too short to analyse.
	Short Artefact = "short"
	// NoBeat: the QRS band went quiet for 2 s or more while the signal did
	// not (mains hum, a floating input, or a real pause of the heart). The
	// trace cannot tell a lost electrode from a pause, and a pause matters
	// to the reader, so it is named as either and said on the recording
	// page (Analyse adds a warning), not called lead off.
	NoBeat Artefact = "no_beat"
)

// Label is the artefact in words, for the strip and the recording page.
func (a Artefact) Label() string {
	switch a {
	case LeadOff:
		return "lead off"
	case Saturated:
		return "saturated"
	case Flat:
		return "flat line"
	case Noise:
		return "excessive noise"
	case Short:
		return "too short between artefacts"
	case NoBeat:
		return "no beat found (a pause or lost contact)"
	}
	return string(a)
}

// Stretch is an unusable part of a recording: samples [Start, End).
type Stretch struct {
	Start int      `json:"start"`
	End   int      `json:"end"`
	Kind  Artefact `json:"kind"`
}

// Quality is what AssessQuality finds: the unusable stretches, in time
// order and apart from one another, and the usable time that is left.
type Quality struct {
	Stretches []Stretch `json:"stretches,omitempty"`
	// Seconds is the recording's length, UsableSeconds what the stretches
	// leave of it.
	Seconds       float64 `json:"seconds"`
	UsableSeconds float64 `json:"usable_seconds"`
}

// Span is a run of samples [Start, End).
type Span struct{ Start, End int }

// Usable returns the usable parts of a recording of n samples: the
// complement of the stretches.
func (q Quality) Usable(n int) []Span {
	var out []Span
	at := 0
	for _, s := range q.Stretches {
		if s.Start > at {
			out = append(out, Span{at, s.Start})
		}
		at = max(at, s.End)
	}
	if at < n {
		out = append(out, Span{at, n})
	}
	return out
}

// Text says how much is usable, e.g. "38 s usable of 47 s (9 s excluded:
// saturated 3.6 s, excessive noise 5.4 s)".
func (q Quality) Text(rateHz float64) string {
	s := fmt.Sprintf("%s s usable of %s s", trimSeconds(q.UsableSeconds), trimSeconds(q.Seconds))
	if len(q.Stretches) == 0 {
		return s
	}
	by := map[Artefact]int{}
	var order []Artefact
	for _, st := range q.Stretches {
		if _, ok := by[st.Kind]; !ok {
			order = append(order, st.Kind)
		}
		by[st.Kind] += st.End - st.Start
	}
	s += " (excluded: "
	for i, k := range order {
		if i > 0 {
			s += ", "
		}
		s += fmt.Sprintf("%s %s s", k.Label(), trimSeconds(float64(by[k])/rateHz))
	}
	return s + ")"
}

// trimSeconds writes a length to a tenth of a second, without ".0".
func trimSeconds(v float64) string {
	v = math.Round(v*10) / 10
	if v == math.Trunc(v) {
		return fmt.Sprintf("%.0f", v)
	}
	return fmt.Sprintf("%.1f", v)
}

// Thresholds of the quality check. Each names its source; "ours" marks a
// choice of ours, set on synthetic recordings and argued below.
const (
	// flatWindowSeconds and flatRangeMV: a flat line is a stretch in which
	// every 1 s window holds less than 20 uV from lowest to highest. A
	// living heart puts a QRS, a P or a T wave of 50 uV or more into any
	// second (the longest TP segment at 40 bpm is under 1 s), so only a
	// dead input is this quiet. Flat-line detection over a window is common
	// practice in signal quality indices (Clifford GD et al. Physiol Meas
	// 2012;33:1419-33, from memory); the values are ours.
	flatWindowSeconds = 1.0
	flatRangeMV       = 0.020
	// railSeconds: the signal held at a digital limit for 40 ms or more is
	// saturated (ours: a clipped R peak touches the limit for a sample or
	// two, an overloaded amplifier for far longer). Saturation at the
	// converter's limits is a standard check (Clifford et al. 2012, from
	// memory).
	railSeconds = 0.040
	// railRecoverSeconds: after a saturation the amplifier's baseline
	// recovers; the 250 ms either side are counted with it (ours).
	railRecoverSeconds = 0.250
	// leadOffMV and leadOffSeconds: the baseline (a 200 ms moving average)
	// more than 5 mV from the recording's median level for 100 ms or more
	// is no skin contact (ours: the largest QRS is a few mV, and breathing
	// moves the baseline by well under 1 mV).
	leadOffMV      = 5.0
	leadOffSeconds = 0.100
	// Noise is judged on the QRS band (the detector's 5-15 Hz band-pass at
	// 200 Hz) over 2 s windows every 0.25 s, by two figures: the kurtosis of
	// the band-passed signal, and its noise floor, the median of its
	// magnitude, against the recording's median window. The kurtosis index
	// of Li Q, Mark RG, Clifford GD. Physiol Meas 2008;29:15-32 (kSQI, from
	// memory) calls a window noisy below 5: distinct QRS complexes make the
	// band spiky, noise makes it near-Gaussian (3). Alone it fails on real
	// rhythms here: on synthetic recordings sinus rhythm at 150-220 bpm, AF
	// and tall T waves all gave 2.5-4.6. Between QRS complexes, though, the
	// band of a clean lead is quiet however many complexes a window holds,
	// so its median magnitude stays near the recording's; an artefact raises
	// it (ours). A window is noisy when its kurtosis is under 5 and its
	// noise floor at least 3 times the recording's median: over 80
	// synthetic recordings of AF and sinus rhythm at 40-150 bpm, with
	// wander and with white noise at 3 dB, no window reached 2.4 times;
	// motion artefact of 2 and 4 mV peak to peak reached at least 3.9 and
	// 7.3 times over nine noise seeds (1 mV, the QRS's own size, only 2.3:
	// it is not caught). A recording that is
	// noise from end to end does not stand out from itself and is not
	// caught either. A noisy stretch grows over the windows next to it
	// while their band power stays at 1.5 times the median or more, and by
	// 0.25 s either side: a window only turns noisy once the artefact fills
	// most of it.
	noiseWindowSeconds = 2.0
	quietWindowSeconds = 2.0
	noiseHopSeconds    = 0.25
	noiseKurtosis      = 5.0
	noiseFloorRatio    = 3.0
	noiseWidenSeconds  = 0.25
	noiseEdgeRatio     = 1.5
	// quietPowerRatio: a 2 s window whose QRS-band power is under 2% of the
	// recording's median window holds no QRS complex, and when it is not a
	// flat line either, the electrode is picking up something other than
	// the heart (ours: an injected lost electrode, 50 Hz hum over a
	// decaying offset, gave under 1%; a 2 s window always holds a QRS at
	// 30 bpm or more). It is marked NoBeat: a pause of more than 2 s
	// without a beat looks the same, so the mark names both.
	quietPowerRatio = 0.02
	// minUsableSeconds: a usable piece shorter than 2 s between artefacts
	// is left out too (ours): the detector learns its thresholds over 2 s.
	minUsableSeconds = 2.0
	// mergeSeconds: stretches closer than 0.5 s are joined (ours).
	mergeSeconds = 0.5
)

// Limits are the digital limits of a recorder in mV (the physical values of
// the smallest and largest digital sample), when the file states them.
type Limits struct{ Min, Max float64 }

// Known reports whether the limits were stated.
func (l Limits) Known() bool { return l.Max > l.Min }

// AssessQuality classifies the stretches of w that beat detection cannot
// use: lead-off (missing samples, marked NaN by the reader, or a baseline
// out of range), saturation at the digital limits lim (or, when the file
// states none, at the recording's own extremes), flat line, and excessive
// noise; see the thresholds above for each method and its source. Stretches
// of different kinds that touch are kept apart in time order; pieces of
// usable signal shorter than 2 s between them are added as Short.
func AssessQuality(w Waveform, lim Limits) Quality {
	n := len(w.Samples)
	fs := w.RateHz
	q := Quality{Seconds: w.Seconds()}
	if n == 0 || !(fs > 0) {
		return q
	}
	mark := make([]Artefact, n) // "" = usable
	set := func(from, to int, k Artefact) {
		for i := max(0, from); i < min(n, to); i++ {
			if mark[i] == "" {
				mark[i] = k
			}
		}
	}
	x := w.Samples
	for i, v := range x {
		if math.IsNaN(v) {
			set(i, i+1, LeadOff)
		}
	}
	leadOff(x, fs, set)
	saturation(x, fs, lim, set)
	flat(x, fs, set)
	noise(x, fs, set)

	// Runs of one kind become stretches; close ones merge.
	var out []Stretch
	for i := 0; i < n; {
		if mark[i] == "" {
			i++
			continue
		}
		j := i
		for j < n && mark[j] == mark[i] {
			j++
		}
		out = append(out, Stretch{i, j, mark[i]})
		i = j
	}
	merge := int(mergeSeconds * fs)
	minUse := int(minUsableSeconds * fs)
	var kept []Stretch
	for _, s := range out {
		if k := len(kept); k > 0 {
			last := &kept[k-1]
			gap := s.Start - last.End
			if gap <= merge && last.Kind == s.Kind {
				last.End = s.End
				continue
			}
			if gap > 0 && gap < minUse {
				kept = append(kept, Stretch{last.End, s.Start, Short})
			}
		}
		kept = append(kept, s)
	}
	// A short usable piece at either end of the recording goes too.
	if len(kept) > 0 {
		if first := kept[0]; first.Start > 0 && first.Start < minUse {
			kept = slices.Insert(kept, 0, Stretch{0, first.Start, Short})
		}
		if last := kept[len(kept)-1]; last.End < n && n-last.End < minUse {
			kept = append(kept, Stretch{last.End, n, Short})
		}
	}
	q.Stretches = kept
	bad := 0
	for _, s := range kept {
		bad += s.End - s.Start
	}
	q.UsableSeconds = float64(n-bad) / fs
	return q
}

// leadOff marks where the 200 ms baseline is more than leadOffMV from the
// recording's median for leadOffSeconds or more.
func leadOff(x []float64, fs float64, set func(int, int, Artefact)) {
	n := len(x)
	finite := make([]float64, 0, n)
	for _, v := range x {
		if !math.IsNaN(v) {
			finite = append(finite, v)
		}
	}
	if len(finite) == 0 {
		return
	}
	med := nthSmallest(finite, len(finite)/2) // the upper median: the level, not a figure to report
	half := max(1, int(0.1*fs))
	minRun := max(1, int(leadOffSeconds*fs))
	// Running mean over [i-half, i+half], NaN samples left out.
	sum, cnt := 0.0, 0
	add := func(i int, sign int) {
		if i < 0 || i >= n || math.IsNaN(x[i]) {
			return
		}
		sum += float64(sign) * x[i]
		cnt += sign
	}
	for i := 0; i < half && i < n; i++ {
		add(i, 1)
	}
	run := -1
	for i := 0; i <= n; i++ {
		out := false
		if i < n {
			add(i+half, 1)
			add(i-half-1, -1)
			out = cnt > 0 && math.Abs(sum/float64(cnt)-med) > leadOffMV
		}
		switch {
		case out && run < 0:
			run = i
		case !out && run >= 0:
			if i-run >= minRun {
				// The average reaches 100 ms either way: the step that
				// started it may lie that far outside the run.
				set(run-half, i+half, LeadOff)
			}
			run = -1
		}
	}
}

// saturation marks runs at a digital limit lasting railSeconds or more,
// with railRecoverSeconds either side. Without stated limits the
// recording's own extremes are taken: a true signal never dwells at its
// maximum for 40 ms.
func saturation(x []float64, fs float64, lim Limits, set func(int, int, Artefact)) {
	lo, hi := lim.Min, lim.Max
	tol := 0.0015 // samples are kept to the microvolt; half a step of a 3 uV converter
	if !lim.Known() {
		lo, hi = math.Inf(1), math.Inf(-1)
		for _, v := range x {
			if !math.IsNaN(v) {
				lo, hi = min(lo, v), max(hi, v)
			}
		}
		tol = 0.0005
		if !(hi > lo) {
			return // constant: the flat-line check's business
		}
	} else {
		tol = max(tol, (hi-lo)/65535)
	}
	minRun := max(2, int(math.Ceil(railSeconds*fs)))
	pad := int(railRecoverSeconds * fs)
	n := len(x)
	for i := 0; i < n; {
		at := func(k int) int {
			switch {
			case x[k] >= hi-tol:
				return 1
			case x[k] <= lo+tol:
				return -1
			}
			return 0
		}
		if math.IsNaN(x[i]) || at(i) == 0 {
			i++
			continue
		}
		side := at(i)
		j := i
		for j < n && !math.IsNaN(x[j]) && at(j) == side {
			j++
		}
		if j-i >= minRun {
			set(i-pad, j+pad, Saturated)
		}
		i = j
	}
}

// flat marks every 1 s window whose range is under flatRangeMV.
func flat(x []float64, fs float64, set func(int, int, Artefact)) {
	n := len(x)
	win := int(flatWindowSeconds * fs)
	if win < 2 || n < win {
		return
	}
	nans := make([]int, n+1) // missing samples before index i
	for i, v := range x {
		nans[i+1] = nans[i]
		if math.IsNaN(v) {
			nans[i+1]++
		}
	}
	// Sliding minimum and maximum over [i-win+1, i] with monotone queues
	// of indices; missing samples are left out of them.
	var minQ, maxQ []int
	marked := 0 // samples before this are already marked
	for i := 0; i < n; i++ {
		if v := x[i]; !math.IsNaN(v) {
			for len(minQ) > 0 && x[minQ[len(minQ)-1]] >= v {
				minQ = minQ[:len(minQ)-1]
			}
			minQ = append(minQ, i)
			for len(maxQ) > 0 && x[maxQ[len(maxQ)-1]] <= v {
				maxQ = maxQ[:len(maxQ)-1]
			}
			maxQ = append(maxQ, i)
		}
		start := i - win + 1
		for len(minQ) > 0 && minQ[0] < start {
			minQ = minQ[1:]
		}
		for len(maxQ) > 0 && maxQ[0] < start {
			maxQ = maxQ[1:]
		}
		if start < 0 || len(minQ) == 0 || nans[i+1]-nans[start] > 0 {
			continue
		}
		if x[maxQ[0]]-x[minQ[0]] < flatRangeMV {
			set(max(start, marked), i+1, Flat)
			marked = i + 1
		}
	}
}

// noise marks the centre hop of every window whose QRS band looks like
// noise (see the thresholds). The band-pass runs at 200 Hz on a copy whose
// missing samples are held at the last value.
func noise(x []float64, fs float64, set func(int, int, Artefact)) {
	n := len(x)
	if n == 0 {
		return
	}
	y := make([]float64, n)
	last := 0.0
	for i, v := range x {
		if !math.IsNaN(v) {
			last = v
		}
		y[i] = last
	}
	y200 := resample(smooth(y, fs), fs)
	pad := int(padSeconds * ptRate)
	xp := make([]float64, 0, pad+len(y200))
	for range pad {
		xp = append(xp, y200[0])
	}
	xp = append(xp, y200...)
	bp := highPass(lowPass(xp))
	// bp[k] is the band-passed signal at 200 Hz sample k - pad - delay.
	at := func(k int) float64 {
		j := k + pad + bandPassDelay
		if j < 0 || j >= len(bp) {
			return 0
		}
		return bp[j]
	}
	m := len(y200)
	toSamples := func(k200 float64) int { return int(math.Round(k200 / ptRate * fs)) }
	// Quiet windows: no QRS in 2 s.
	win, hop := int(quietWindowSeconds*ptRate), int(noiseHopSeconds*ptRate)
	if stats, med := bandStats(at, m, win, hop, false); med > 0 {
		for _, s := range stats {
			if s.power > 0 && s.power < quietPowerRatio*med {
				c0 := float64(s.from + (win-hop)/2)
				set(toSamples(c0), toSamples(c0+float64(hop)), NoBeat)
			}
		}
	}
	// Noisy windows, and the windows next to them that keep a raised power
	// (an artefact fades in and out: its edges hold too little of it to
	// turn the kurtosis).
	win = int(noiseWindowSeconds * ptRate)
	stats, med := bandStats(at, m, win, hop, true)
	floors := make([]float64, len(stats))
	for i, s := range stats {
		floors[i] = s.floor
	}
	medFloor := median(floors)
	noisy := make([]bool, len(stats))
	for i, s := range stats {
		noisy[i] = s.kurt < noiseKurtosis && medFloor > 0 && s.floor >= noiseFloorRatio*medFloor
	}
	raised := func(i int) bool { return stats[i].power >= noiseEdgeRatio*med }
	grown := slices.Clone(noisy)
	for i := range stats {
		if !noisy[i] {
			continue
		}
		for j := i - 1; j >= 0 && !grown[j] && raised(j); j-- {
			grown[j] = true
		}
		for j := i + 1; j < len(stats) && !noisy[j] && raised(j); j++ {
			grown[j] = true
		}
	}
	for i, s := range stats {
		if !grown[i] {
			continue
		}
		// The window's centre hop, widened, in the recording's samples.
		c0 := float64(s.from + (win-hop)/2)
		w := noiseWidenSeconds * ptRate
		set(toSamples(c0-w), toSamples(c0+float64(hop)+w), Noise)
	}
}

// bandStat is one window of the QRS band at 200 Hz.
type bandStat struct {
	from  int // first 200 Hz sample of the window
	power float64
	kurt  float64
	floor float64 // median magnitude
}

// bandStats measures windows of win samples every hop over the first m
// samples of the band-passed signal at (with the noise floor when floor is
// set), and returns them with their median power.
func bandStats(at func(int) float64, m, win, hop int, floor bool) ([]bandStat, float64) {
	if m < win {
		win = m
	}
	if win < hop || hop < 1 {
		return nil, 0
	}
	var stats []bandStat
	powers := []float64{}
	mags := make([]float64, win)
	for from := 0; from+win <= m; from += hop {
		var m2, m4, mean float64
		for k := from; k < from+win; k++ {
			mean += at(k)
			mags[k-from] = math.Abs(at(k))
		}
		mean /= float64(win)
		for k := from; k < from+win; k++ {
			d := at(k) - mean
			m2 += d * d
			m4 += d * d * d * d
		}
		m2 /= float64(win)
		m4 /= float64(win)
		k := 0.0
		if m2 > 0 {
			k = m4 / (m2 * m2)
		}
		f := 0.0
		if floor {
			f = nthSmallest(mags, win/2)
		}
		stats = append(stats, bandStat{from, m2, k, f})
		powers = append(powers, m2)
	}
	if len(stats) == 0 {
		return nil, 0
	}
	return stats, median(powers)
}

// nthSmallest reorders x and returns its k-th smallest value (0-based), in
// linear expected time (Hoare's selection with a middle pivot).
func nthSmallest(x []float64, k int) float64 {
	lo, hi := 0, len(x)-1
	for lo < hi {
		p := x[lo+(hi-lo)/2]
		i, j := lo, hi
		for i <= j {
			for x[i] < p {
				i++
			}
			for x[j] > p {
				j--
			}
			if i <= j {
				x[i], x[j] = x[j], x[i]
				i++
				j--
			}
		}
		switch {
		case k <= j:
			hi = j
		case k >= i:
			lo = i
		default:
			return x[k]
		}
	}
	return x[k]
}
