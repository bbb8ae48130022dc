package ecg

import (
	"math"
	"slices"
)

// Timing constants of the detector, from Pan and Tompkins 1985 unless marked
// ours. Durations are in seconds.
const (
	learnSeconds      = 2.0   // learning phase that seeds the thresholds
	refractorySeconds = 0.200 // no QRS within 200 ms of the previous one
	tWaveSeconds      = 0.360 // a candidate this close may be a T wave
	missedFactor      = 1.66  // search back after 166% of the mean RR
	rrLowFactor       = 0.92  // RR LOW LIMIT
	rrHighFactor      = 1.16  // RR HIGH LIMIT
	refineSeconds     = 0.050 // ours: half-width of the final R-peak search
	initialRRSeconds  = 1.0   // ours: RR assumed before two beats are known
	relearnSeconds    = 3.0   // ours: with no QRS for this long, seed the thresholds again
	padSeconds        = 1.0   // ours: constant lead-in that absorbs filter start-up
	tailSeconds       = 0.4   // ours: constant lead-out so a last beat completes
)

// Detection is the result of Detect.
type Detection struct {
	// Beats are the sample indices of the R peaks in the waveform.
	Beats []int
	// Times are the R-peak times in seconds from the first sample, refined
	// between samples by fitting a parabola through the peak.
	Times []float64
	// RRms are the intervals between successive Times, in milliseconds.
	RRms []float64
	// MeanHR is 60000 / mean(RRms), in beats per minute; 0 with fewer than
	// two beats.
	MeanHR float64
	// SearchBack counts the beats found by the search-back rule; a high share
	// says the thresholds struggled (noise, or a sudden drop in amplitude).
	SearchBack int
}

// ptPeak is a peak of the integrated signal with what the decision rules need.
type ptPeak struct {
	bp    int     // index of the largest band-passed excursion of the QRS, padded 200 Hz frame
	peakI float64 // integrated-signal peak height (PEAKI)
	peakF float64 // band-passed peak height, absolute (PEAKF)
	slope float64 // largest absolute derivative under the integration window
	sign  float64 // sign of the band-passed excursion: the QRS polarity
}

// Detect finds the QRS complexes of w with the detector of Pan J, Tompkins WJ.
// A real-time QRS detection algorithm. IEEE Trans Biomed Eng 1985;32(3):230-6.
//
// How it runs here, offline:
//   - The signal is low-pass filtered at 40 Hz (zero-phase) and brought to
//     200 Hz by linear interpolation, so the published integer filters apply
//     unchanged.
//   - Stages: low-pass (5-sample delay), high-pass (16), the paper's five-point
//     derivative (2, causal), squaring, 150 ms moving-window integration.
//   - Peaks of the integrated signal are classified with two threshold sets,
//     one on the integrated and one on the band-passed signal:
//     SPK = 0.125 PEAK + 0.875 SPK for a QRS, NPK likewise for noise,
//     THRESHOLD1 = NPK + 0.25 (SPK - NPK), THRESHOLD2 = 0.5 THRESHOLD1; both
//     thresholds are halved while the rhythm is irregular (any of the last 8 RR
//     intervals outside 92-116% of RR AVERAGE2). The first 2 s seed the
//     thresholds (ours: SPK = half the maximum, NPK = half the mean) and the
//     whole signal is then classified from its start.
//   - 200 ms refractory period; a candidate within 360 ms of the previous QRS
//     whose maximal slope is under half of that QRS's slope is a T wave.
//   - Search-back: when no QRS follows within 166% of the mean RR (RR
//     AVERAGE2, or RR AVERAGE1 while irregular), the largest skipped peak above
//     THRESHOLD2 becomes a QRS with SPK = 0.25 PEAK + 0.75 SPK.
//   - Ours: after 3 s without a QRS the thresholds are seeded again from the
//     last 2 s, as in the learning phase, and search-back is retried; without
//     this, one tall artefact or a sudden drop in QRS amplitude to a fifth
//     would silence the detector for the rest of the recording.
//   - Each QRS is then placed on its R peak: the band-pass delay (21 samples
//     at 200 Hz) is removed, and the extreme of the QRS's polarity within
//     +-50 ms is taken in the original-rate signal (zero-phase 40 Hz low-pass
//     above 200 Hz, raw otherwise), then refined by a parabola.
//
// w must pass CheckRecording; its errors are returned unchanged.
func Detect(w Waveform) (Detection, error) {
	if _, err := CheckRecording(w); err != nil {
		return Detection{}, err
	}
	fs := w.RateHz
	xf := smooth(w.Samples, fs)
	x200 := resample(xf, fs)
	pad := int(padSeconds * ptRate)
	tail := int(tailSeconds * ptRate)
	xp := make([]float64, 0, pad+len(x200)+tail)
	for range pad {
		xp = append(xp, x200[0])
	}
	xp = append(xp, x200...)
	for range tail {
		xp = append(xp, x200[len(x200)-1])
	}
	bp := highPass(lowPass(xp))
	d := derivative(bp)
	mwi := squareIntegrate(d)

	peaks := findPeaks(mwi, bp, d, pad, len(x200))
	beats, searched := classify(peaks, mwi, bp, pad, len(x200))

	// Place each beat on the R peak of the original-rate signal.
	n := len(w.Samples)
	half := max(1, int(math.Round(refineSeconds*fs)))
	type placed struct {
		i   int
		t   float64
		amp float64
	}
	var out []placed
	for _, b := range beats {
		est := int(math.Round(float64(b.bp-pad-bandPassDelay) * fs / ptRate))
		if est < -half || est > n-1+half {
			continue
		}
		lo, hi := max(0, est-half), min(n-1, est+half)
		best := lo
		for k := lo + 1; k <= hi; k++ {
			if b.sign*xf[k] > b.sign*xf[best] {
				best = k
			}
		}
		t := float64(best)
		if best > 0 && best < n-1 {
			y0, y1, y2 := xf[best-1], xf[best], xf[best+1]
			if den := y0 - 2*y1 + y2; den != 0 {
				t += math.Max(-0.5, math.Min(0.5, 0.5*(y0-y2)/den))
			}
		}
		out = append(out, placed{best, t / fs, b.sign * xf[best]})
	}
	// Two detections can settle on one R peak; keep the taller of any pair
	// closer than the refractory period.
	slices.SortFunc(out, func(a, b placed) int { return a.i - b.i })
	kept := out[:0]
	minGap := int(refractorySeconds * fs)
	for _, p := range out {
		if k := len(kept); k > 0 && p.i-kept[k-1].i < minGap {
			if p.amp > kept[k-1].amp {
				kept[k-1] = p
			}
			continue
		}
		kept = append(kept, p)
	}

	det := Detection{SearchBack: searched}
	for _, p := range kept {
		det.Beats = append(det.Beats, p.i)
		det.Times = append(det.Times, p.t)
	}
	if len(det.Times) > 1 {
		det.RRms = make([]float64, len(det.Times)-1)
		sum := 0.0
		for i := range det.RRms {
			det.RRms[i] = 1000 * (det.Times[i+1] - det.Times[i])
			sum += det.RRms[i]
		}
		det.MeanHR = 60000 / (sum / float64(len(det.RRms)))
	}
	return det, nil
}

// findPeaks lists the local maxima of the integrated signal that are the
// largest within +-200 ms (two QRS complexes cannot be closer), with the
// band-passed excursion and slope that belong to each.
func findPeaks(mwi, bp, d []float64, pad, m int) []ptPeak {
	hw := int(refractorySeconds * ptRate)
	var peaks []ptPeak
	for i := 1; i < len(mwi)-1; i++ {
		v := mwi[i]
		if !(v > mwi[i-1] && v >= mwi[i+1]) || v <= 0 {
			continue
		}
		top := true
		for j := max(0, i-hw); j < min(len(mwi), i+hw+1) && top; j++ {
			if j < i && mwi[j] >= v || j > i && mwi[j] > v {
				top = false
			}
		}
		if !top {
			continue
		}
		// The integrator at i averages the squared derivative over
		// [i-29, i], which is the band-passed signal over [i-31, i-2]; look
		// a little wider for the QRS's largest excursion.
		lo, hi := max(0, i-derivDelay-integratorSpan-8), min(len(bp)-1, i-derivDelay+3)
		b := lo
		for k := lo; k <= hi; k++ {
			if math.Abs(bp[k]) > math.Abs(bp[b]) {
				b = k
			}
		}
		if x := b - pad - bandPassDelay; x < 0 || x >= m {
			continue // belongs to the padding
		}
		slope := 0.0
		for k := max(0, i-integratorSpan+1); k <= i; k++ {
			slope = math.Max(slope, math.Abs(d[k]))
		}
		sign := 1.0
		if bp[b] < 0 {
			sign = -1
		}
		peaks = append(peaks, ptPeak{bp: b, peakI: v, peakF: math.Abs(bp[b]), slope: slope, sign: sign})
	}
	return peaks
}

// rrState keeps the two RR averages of the paper.
type rrState struct {
	recent  []float64 // last 8 RR intervals (RR AVERAGE1)
	regular []float64 // last 8 RR intervals within the limits (RR AVERAGE2)
}

func meanOr(x []float64, dflt float64) float64 {
	if len(x) == 0 {
		return dflt
	}
	s := 0.0
	for _, v := range x {
		s += v
	}
	return s / float64(len(x))
}

func push8(x []float64, v float64) []float64 {
	x = append(x, v)
	if len(x) > 8 {
		x = x[1:]
	}
	return x
}

func (s *rrState) add(rr float64) {
	avg2 := meanOr(s.regular, initialRRSeconds*ptRate)
	s.recent = push8(s.recent, rr)
	if len(s.regular) == 0 || rr >= rrLowFactor*avg2 && rr <= rrHighFactor*avg2 {
		s.regular = push8(s.regular, rr)
		return
	}
	// Ours: when none of the last 8 intervals fits RR AVERAGE2 the rate has
	// moved for good, and the regular average restarts from the recent one.
	if len(s.recent) == 8 {
		for _, v := range s.recent {
			if v >= rrLowFactor*avg2 && v <= rrHighFactor*avg2 {
				return
			}
		}
		s.regular = append(s.regular[:0], s.recent...)
	}
}

// irregular reports whether any of the last 8 intervals lies outside the RR
// limits around RR AVERAGE2.
func (s *rrState) irregular() bool {
	avg2 := meanOr(s.regular, initialRRSeconds*ptRate)
	for _, v := range s.recent {
		if v < rrLowFactor*avg2 || v > rrHighFactor*avg2 {
			return true
		}
	}
	return false
}

func (s *rrState) missedLimit() float64 {
	if s.irregular() {
		return missedFactor * meanOr(s.recent, initialRRSeconds*ptRate)
	}
	return missedFactor * meanOr(s.regular, initialRRSeconds*ptRate)
}

// classify applies the decision rules to the peaks in time order and returns
// the QRS peaks and the number found by search-back.
func classify(peaks []ptPeak, mwi, bp []float64, pad, m int) ([]ptPeak, int) {
	var spki, npki, spkf, npkf float64
	// learn seeds the thresholds from the 2 s of signal before end (ours:
	// SPK half the maximum, NPK half the mean).
	learn := func(lo, hi int) {
		lo, hi = max(lo, 0), min(hi, len(mwi))
		maxI, sumI, maxF, sumF := 0.0, 0.0, 0.0, 0.0
		for k := lo; k < hi; k++ {
			maxI = math.Max(maxI, mwi[k])
			sumI += mwi[k]
			a := math.Abs(bp[k])
			maxF = math.Max(maxF, a)
			sumF += a
		}
		cnt := float64(max(1, hi-lo))
		spki, npki = 0.5*maxI, 0.5*sumI/cnt
		spkf, npkf = 0.5*maxF, 0.5*sumF/cnt
	}
	// Learning phase: the first 2 s of signal (after the padding), plus the
	// filter delays so the integrated signal of those 2 s is all in.
	learnSpan := int(learnSeconds * ptRate)
	learn(pad, pad+learnSpan+bandPassDelay+integratorSpan)

	refr := int(refractorySeconds * ptRate)
	twave := int(tWaveSeconds * ptRate)
	var (
		beats    []ptPeak
		skipped  []ptPeak // noise peaks since the last QRS, for search-back
		rr       rrState
		searched int
	)
	thresholds := func() (i1, f1 float64) {
		i1 = npki + 0.25*(spki-npki)
		f1 = npkf + 0.25*(spkf-npkf)
		if rr.irregular() {
			i1, f1 = i1/2, f1/2
		}
		return i1, f1
	}
	isTWave := func(p ptPeak) bool {
		if len(beats) == 0 {
			return false
		}
		last := beats[len(beats)-1]
		return p.bp-last.bp < twave && p.slope < 0.5*last.slope
	}
	accept := func(p ptPeak, weight float64) {
		spki = weight*p.peakI + (1-weight)*spki
		spkf = weight*p.peakF + (1-weight)*spkf
		if len(beats) > 0 {
			rr.add(float64(p.bp - beats[len(beats)-1].bp))
		}
		beats = append(beats, p)
		keep := skipped[:0]
		for _, s := range skipped {
			if s.bp > p.bp {
				keep = append(keep, s)
			}
		}
		skipped = keep
	}
	noise := func(p ptPeak) {
		npki = 0.125*p.peakI + 0.875*npki
		npkf = 0.125*p.peakF + 0.875*npkf
	}
	searchBack := func(upto int) bool {
		from := pad
		if len(beats) > 0 {
			from = beats[len(beats)-1].bp + refr
		}
		i1, f1 := thresholds()
		best := -1
		for k, s := range skipped {
			if s.bp < from || s.bp >= upto || s.peakI <= i1/2 || s.peakF <= f1/2 || isTWave(s) {
				continue
			}
			if best < 0 || s.peakI > skipped[best].peakI {
				best = k
			}
		}
		if best < 0 {
			return false
		}
		accept(skipped[best], 0.25)
		searched++
		return true
	}

	// missed reports whether a QRS should have come before index at: the
	// search-back rule, or, before the first beat, the initial RR.
	missed := func(at int) bool {
		from := pad
		if len(beats) > 0 {
			from = beats[len(beats)-1].bp
		}
		return float64(at-from) > rr.missedLimit()
	}
	// catchUp searches back as long as beats are overdue before upto; each
	// beat found moves the reference point, so several can be recovered.
	catchUp := func(upto int) {
		for missed(upto) {
			if !searchBack(upto) {
				return
			}
		}
	}
	relearnSpan := int(relearnSeconds * ptRate)
	lastLearn := pad
	for _, p := range peaks {
		// Search-back never reaches further than the relearning does, so
		// older skipped peaks can go; this keeps a recording without any
		// QRS (noise only) from costing quadratic time.
		cut := 0
		for cut < len(skipped) && skipped[cut].bp < p.bp-2*relearnSpan {
			cut++
		}
		skipped = skipped[cut:]
		catchUp(p.bp)
		// Ours: thresholds set by a tall artefact or by beats that have
		// since shrunk would never let a QRS through again; after 3 s
		// without one, seed them from the last 2 s and search back again.
		since := lastLearn
		if len(beats) > 0 {
			since = max(since, beats[len(beats)-1].bp)
		}
		if p.bp-since > relearnSpan {
			learn(p.bp-learnSpan, p.bp)
			lastLearn = p.bp
			catchUp(p.bp)
		}
		if len(beats) > 0 && p.bp-beats[len(beats)-1].bp < refr {
			continue
		}
		i1, f1 := thresholds()
		if p.peakI > i1 && p.peakF > f1 {
			if isTWave(p) {
				noise(p)
				continue
			}
			accept(p, 0.125)
			continue
		}
		noise(p)
		skipped = append(skipped, p)
	}
	end := pad + bandPassDelay + m
	catchUp(end)
	return beats, searched
}
