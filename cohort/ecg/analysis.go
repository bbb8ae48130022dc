package ecg

import (
	"errors"
	"fmt"
	"math"

	"cohortdesk/cohort/rr"
)

// Analysis is one ECG lead taken through the steps of intake: its samples
// at the stored resolution, its beats and the hint computed from them.
type Analysis struct {
	// Waveform holds the samples as they are stored (Microvolts); samples
	// the file marked missing are held at the last value before them (the
	// quality check has already put them in a lead-off stretch).
	Waveform Waveform
	// Beats are the R peaks (sample indices) found in the usable stretches.
	Beats []int
	Hint  RecordingHint
	// Signal is the lead's number among the file's signals (SignalInfo);
	// 0 for samples given directly.
	Signal int
}

// Analyse takes one ECG lead through the steps of analysis, in this order:
//
//  1. the samples are brought to the stored resolution (Microvolts), so
//     that analysing a stored recording again gives the same result;
//  2. AssessQuality marks the stretches beat detection cannot use (lim are
//     the recorder's digital limits in mV, when the file states them);
//  3. Detect runs on every usable stretch on its own, so an artefact
//     neither produces beats nor upsets the thresholds of the stretches
//     after it; intervals never span a gap between stretches;
//  4. FindPremature finds premature beats, and the intervals around them
//     are left out;
//  5. the hint scores the intervals between normal beats (see HintPattern).
//
// Missing samples are NaN. w must otherwise pass CheckRecording.
func Analyse(w Waveform, lim Limits, p rr.Params) (Analysis, error) {
	stored := make([]float64, len(w.Samples))
	missing := 0
	for i, v := range w.Samples {
		if math.IsNaN(v) {
			stored[i] = v
			missing++
			continue
		}
		stored[i] = float64(Microvolts(v)) / 1000
	}
	if missing == len(stored) && missing > 0 {
		return Analysis{}, fmt.Errorf("ecg: every sample of the lead is marked missing: %w", ErrRecording)
	}
	w.Samples = stored
	if lim.Known() {
		lim = Limits{max(lim.Min, float64(math.MinInt16)/1000), min(lim.Max, float64(math.MaxInt16)/1000)}
	}
	q := AssessQuality(w, lim)
	if missing > 0 {
		last := math.NaN()
		for i, v := range stored {
			if !math.IsNaN(v) {
				last = v
				continue
			}
			if math.IsNaN(last) {
				last = firstFinite(stored)
			}
			stored[i] = last
		}
	}
	if _, err := CheckRecording(w); err != nil {
		return Analysis{}, err
	}

	var (
		beats      []int
		rrMs       []float64 // NaN across a gap between usable stretches
		searchBack int
		nnAll      []float64 // every interval inside a stretch, for the rate
	)
	for _, sp := range q.Usable(len(stored)) {
		part := w
		part.Samples = stored[sp.Start:sp.End]
		det, err := Detect(part)
		if err != nil {
			if errors.Is(err, ErrRecording) {
				continue // a piece the detector cannot take has no beats
			}
			return Analysis{}, err
		}
		searchBack += det.SearchBack
		for k, b := range det.Beats {
			if len(beats) > 0 {
				if k == 0 {
					rrMs = append(rrMs, math.NaN())
				} else {
					rrMs = append(rrMs, det.RRms[k-1])
					nnAll = append(nnAll, det.RRms[k-1])
				}
			}
			beats = append(beats, sp.Start+b)
		}
	}
	ect := FindPremature(w, beats, rrMs)
	var nn []float64
	for i, v := range rrMs {
		if !math.IsNaN(v) && !ect.Excluded[i] {
			nn = append(nn, v)
		}
	}
	h := scoreHint(nn, len(ect.Premature), p)
	h.Beats = len(beats)
	h.SearchBack = searchBack
	h.Quality = &q
	h.Premature = ect.Premature
	if len(nnAll) > 0 {
		sum := 0.0
		for _, v := range nnAll {
			sum += v
		}
		h.MeanHR = 60000 / (sum / float64(len(nnAll)))
	}
	if missing > 0 {
		h.Warnings = append(h.Warnings, fmt.Sprintf("%d samples are marked missing in the file; they are counted as lead off.", missing))
	}
	for _, st := range q.Stretches {
		if st.Kind == NoBeat {
			h.Warnings = append(h.Warnings, fmt.Sprintf("No beat was found for %s s from %s s: a pause of the heart or an electrode that lost contact; read the strip there.",
				trimSeconds(float64(st.End-st.Start)/w.RateHz), trimSeconds(float64(st.Start)/w.RateHz)))
		}
	}
	return Analysis{Waveform: w, Beats: beats, Hint: h}, nil
}

func firstFinite(x []float64) float64 {
	for _, v := range x {
		if !math.IsNaN(v) {
			return v
		}
	}
	return 0
}
