package ecg

import (
	"fmt"
	"strings"

	"cohortdesk/cohort/rr"
)

// EvaluateOptions steer EvaluateRecord.
type EvaluateOptions struct {
	// Window is the match window in seconds: a detected beat at most this
	// far from a reference beat matches it. EC57 uses 150 ms (from memory).
	Window float64
	// FromSeconds leaves out the beginning of the record, reference and
	// detected beats alike: EC57 excludes the first 5 minutes of each record
	// as the detector's learning period (from memory); 0 compares all.
	FromSeconds float64
	// Signal picks the signal analysed by its label (any letter case);
	// empty takes the lead intake would analyse first.
	Signal string
	// Params are the beat-interval parameters of the hint.
	Params rr.Params
}

// Evaluation is one record's comparison.
type Evaluation struct {
	Record   string
	Signal   string
	Seconds  float64
	Usable   float64
	RefBeats int
	Detected int
	Match    Match
	// Hint is the analysis's hint pattern and premature-beat count, shown
	// beside the figures.
	Pattern   HintPattern
	Premature int
}

// EvaluateRecord runs the analysis of intake (quality check, detection per
// usable stretch, premature beats) on a WFDB record and compares its beats
// with the reference beats of an annotation file (MatchBeats). Beats are
// compared as sample times at the record's rate; the record's length is not
// limited as intake limits uploads.
func EvaluateRecord(rec WFDBRecord, anns []Annotation, o EvaluateOptions) (Evaluation, error) {
	c := rec.Contents
	ev := Evaluation{Record: rec.Header.Record}
	li := c.Chosen
	if o.Signal != "" {
		li = -1
		for i, l := range c.Leads {
			if strings.EqualFold(l.Waveform.Label, o.Signal) {
				li = i
			}
		}
		if li < 0 {
			var names []string
			for _, l := range c.Leads {
				names = append(names, l.Waveform.Label)
			}
			return ev, fmt.Errorf("ecg: record %s has no ECG signal labelled %q (its leads: %s)", rec.Header.Record, o.Signal, strings.Join(names, ", "))
		}
	}
	lead := c.Leads[li]
	w := lead.Waveform
	ev.Signal, ev.Seconds = w.Label, w.Seconds()
	a, err := Analyse(w, lead.Limits, o.Params)
	if err != nil {
		return ev, err
	}
	ev.Usable = a.Hint.Quality.UsableSeconds
	ev.Pattern, ev.Premature = a.Hint.Pattern, len(a.Hint.Premature)
	fs := w.RateHz
	var ref, det []float64
	for _, s := range BeatSamples(anns) {
		if t := float64(s) / fs; t >= o.FromSeconds && t <= ev.Seconds {
			ref = append(ref, t)
		}
	}
	for _, b := range a.Beats {
		if t := float64(b) / fs; t >= o.FromSeconds {
			det = append(det, t)
		}
	}
	ev.RefBeats, ev.Detected = len(ref), len(det)
	ev.Match = MatchBeats(ref, det, o.Window)
	return ev, nil
}
