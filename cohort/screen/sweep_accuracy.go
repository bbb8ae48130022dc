package screen

import (
	"fmt"

	"cohortdesk/cohort"
	"cohortdesk/cohort/overread"
	"cohortdesk/cohort/stats"
)

// Reference is what the over-reads say about a participant-week: the
// reference standard a sweep's flags are compared with. The values are in
// order of strength; a week covered by several cases takes the strongest.
type Reference int

// The references of a participant-week.
const (
	RefNone            Reference = iota // no case with an over-read covers the week
	RefPending                          // readers disagree and no adjudication yet
	RefUninterpretable                  // the recordings could not be read
	RefNotAF                            // over-read as sinus, flutter or another rhythm
	RefAF                               // over-read as atrial fibrillation: confirmed
)

// ReferenceCase is a follow-up case as a sweep's reference standard sees it:
// the participant-weeks it covers and its recordings, each with the
// conclusion of its readings (overread.Resolve).
type ReferenceCase struct {
	ParticipantID       int64
	FirstWeek, LastWeek int
	Recordings          []ReferenceRecording
}

// ReferenceRecording is one recording of a reference case: the conclusion
// of its readings and whether it is too short for a diagnostic read.
type ReferenceRecording struct {
	Conclusion overread.Conclusion
	TooShort   bool // under the 30 s a single-lead diagnosis needs
}

// Reference is the case's reference, by the same rule as the screening
// cascade and the agreement statistics (overread.Conclusion.Diagnostic):
// only recordings long enough for a diagnostic read count. AF when any of
// them settled on AF, else not AF when any settled on another interpretable
// rhythm, else uninterpretable when any settled on that, else pending when a
// recording has readings that settle nothing (readers disagree), else none.
func (c ReferenceCase) Reference() Reference {
	ref := RefNone
	for _, rec := range c.Recordings {
		v := rec.Conclusion
		r := RefNone
		switch {
		case rec.TooShort, v.Status == overread.Unread:
		case !v.Final:
			r = RefPending
		case v.Diagnostic(rec.TooShort) && v.Rhythm == overread.AF:
			r = RefAF
		case v.Diagnostic(rec.TooShort):
			r = RefNotAF
		default:
			r = RefUninterpretable
		}
		ref = max(ref, r)
	}
	return ref
}

// PPVUnits links the two PPVs the app shows, in the words both pages use:
// the threshold sweep's per-week PPV and the statistics' per-episode PPV
// (cohort/cascade). Both count only recordings long enough for a diagnostic
// read (overread.Conclusion.Diagnostic).
const PPVUnits = "Per-week PPV (the threshold sweep) counts participant-weeks: of the weeks a value flags that have a diagnostic over-read, the share with AF confirmed. " +
	"Per-episode PPV (the agreement statistics) counts flagged episodes, the follow-up cases: of the episodes with a diagnostic over-read, the share with AF confirmed. " +
	"An episode of three flagged weeks counts once in the per-episode PPV and three times in the per-week PPV, so the two differ; both count only recordings of at least 30 s."

// SweepRow is the outcome of one value of the swept parameter.
type SweepRow struct {
	Value   float64
	Flagged int // screen-positive weeks among all screened weeks
	// Table counts the weeks with an adjudicated over-read: TP flagged and
	// AF, FP flagged and not AF, FN not flagged but AF, TN neither.
	Table stats.Table2x2
	// PPV (the per-week PPV, see PPVUnits) is confirmed among flagged,
	// Sensitivity flagged among confirmed, both over weeks with a settled
	// diagnostic over-read, with Wilson 95% intervals (nil when the
	// denominator is 0).
	PPV, Sensitivity     stats.Fraction
	PPVCI, SensitivityCI *stats.Interval
}

// SweepAccuracy is a threshold sweep's outcome over every participant-week
// given to it.
type SweepAccuracy struct {
	Param string
	Rows  []SweepRow
	// Weeks is the number of participant-weeks screened per value.
	Weeks int
	// References of the weeks: adjudicated AF and not AF (the PPV and
	// sensitivity denominators come from these), uninterpretable and pending
	// (reported, never silently dropped).
	ConfirmedWeeks, NotAFWeeks, UninterpretableWeeks, PendingWeeks int
}

// sweepChunk is how many prepared weeks a tally holds at once: enough to
// amortise the sweep, few enough (about 60 kB each) to keep memory small for
// any cohort.
const sweepChunk = 256

type weekKey struct {
	participant int64
	week        int
}

// SweepTally computes a threshold sweep's accuracy from participant-weeks
// given one at a time: each week is cleaned and prepared once and every value
// is evaluated on the prepared summaries (Sweep), so a sweep of 20 values
// costs little more than one. Personal baselines, when the protocol uses
// them, come from each participant's own baseline weeks screened under the
// protocol as it stands, and are not swept.
type SweepTally struct {
	p      Protocol
	values []float64
	now    int64
	refs   map[weekKey]Reference
	out    SweepAccuracy

	// the participant being read: their weeks wait until all have arrived,
	// so the baseline weeks are screened before the weeks that use them
	cur       int64
	started   bool
	partWeeks []*Prepared
	partKeys  []weekKey
	// the chunk waiting to be swept
	chunk []*Prepared
	bases []*Baseline
	keys  []weekKey
}

// NewSweepTally starts a sweep of param over values under p; now (Unix ms)
// is the cleaning's present. A sweep that cannot run is refused as by
// CheckSweep; a protocol that is itself invalid is an error.
func NewSweepTally(p Protocol, param string, values []float64, now int64) (*SweepTally, error) {
	if err := CheckSweep(p, param, values); err != nil {
		return nil, err
	}
	if err := p.Validate(); err != nil {
		return nil, err
	}
	t := &SweepTally{p: p, values: values, now: now, refs: map[weekKey]Reference{}, out: SweepAccuracy{Param: param, Rows: make([]SweepRow, len(values))}}
	for i, v := range values {
		t.out.Rows[i].Value = v
	}
	return t, nil
}

// Refer adds the reference standard: every week a case covers takes the
// case's reference, the strongest when several cases cover it.
func (t *SweepTally) Refer(cases []ReferenceCase) {
	for _, c := range cases {
		ref := c.Reference()
		if ref == RefNone {
			continue
		}
		for w := c.FirstWeek; w <= c.LastWeek; w++ {
			k := weekKey{c.ParticipantID, w}
			t.refs[k] = max(t.refs[k], ref)
		}
	}
}

// Add gives the tally one participant-week. A participant's weeks must come
// together and in week order. The week is cleaned and prepared at once, so
// w may be reused afterwards.
func (t *SweepTally) Add(participantID int64, w *cohort.Week) error {
	if t.started && participantID != t.cur {
		if err := t.endParticipant(); err != nil {
			return err
		}
	}
	t.cur, t.started = participantID, true
	cleaned, _ := Clean(w, t.p, t.now)
	t.partWeeks = append(t.partWeeks, Prepare(&cleaned, t.p))
	t.partKeys = append(t.partKeys, weekKey{participantID, w.Week})
	return nil
}

// Swept is the number of participant-weeks swept so far; weeks are swept a
// chunk at a time, so it moves in steps.
func (t *SweepTally) Swept() int { return t.out.Weeks }

// endParticipant gives the participant's weeks their baseline and queues them.
func (t *SweepTally) endParticipant() error {
	var base *Baseline
	if t.p.Baseline.Enabled {
		var first []Result
		for _, pr := range t.partWeeks {
			if pr.Week() < t.p.Baseline.Weeks {
				res, err := Evaluate(pr, t.p, nil)
				if err != nil {
					return err
				}
				first = append(first, res)
			}
		}
		b, err := NewBaseline(t.p, first)
		if err != nil {
			return err
		}
		base = b
	}
	for i, pr := range t.partWeeks {
		t.chunk = append(t.chunk, pr)
		t.keys = append(t.keys, t.partKeys[i])
		var b *Baseline
		if base != nil && pr.Week() >= t.p.Baseline.Weeks {
			b = base
		}
		t.bases = append(t.bases, b)
	}
	t.partWeeks, t.partKeys = t.partWeeks[:0], t.partKeys[:0]
	if len(t.chunk) >= sweepChunk {
		return t.sweep()
	}
	return nil
}

// sweep evaluates the waiting chunk at every value and counts it.
func (t *SweepTally) sweep() error {
	if len(t.chunk) == 0 {
		return nil
	}
	verdicts, err := Sweep(t.chunk, t.bases, t.p, t.out.Param, t.values)
	if err != nil {
		return err
	}
	for vi, vs := range verdicts {
		row := &t.out.Rows[vi]
		for wi, v := range vs {
			flagged := v == Positive
			if flagged {
				row.Flagged++
			}
			switch t.refs[t.keys[wi]] {
			case RefAF:
				if flagged {
					row.Table.TP++
				} else {
					row.Table.FN++
				}
			case RefNotAF:
				if flagged {
					row.Table.FP++
				} else {
					row.Table.TN++
				}
			}
		}
	}
	for _, k := range t.keys {
		switch t.refs[k] {
		case RefAF:
			t.out.ConfirmedWeeks++
		case RefNotAF:
			t.out.NotAFWeeks++
		case RefUninterpretable:
			t.out.UninterpretableWeeks++
		case RefPending:
			t.out.PendingWeeks++
		}
	}
	t.out.Weeks += len(t.chunk)
	t.chunk, t.bases, t.keys = t.chunk[:0], t.bases[:0], t.keys[:0]
	return nil
}

// Finish sweeps what is left and gives every value its PPV and sensitivity
// with Wilson 95% intervals. The tally is spent afterwards.
func (t *SweepTally) Finish() (SweepAccuracy, error) {
	if t.started {
		if err := t.endParticipant(); err != nil {
			return t.out, err
		}
		t.started = false
	}
	if err := t.sweep(); err != nil {
		return t.out, err
	}
	for i := range t.out.Rows {
		r := &t.out.Rows[i]
		acc, err := stats.Diagnostic(r.Table)
		if err != nil {
			return t.out, fmt.Errorf("screen: sweep: %w", err)
		}
		r.PPV, r.Sensitivity = acc.PPV, acc.Sensitivity
		r.PPVCI = wilson95(r.PPV)
		r.SensitivityCI = wilson95(r.Sensitivity)
	}
	return t.out, nil
}

// wilson95 is the Wilson 95% interval of f, nil without a denominator.
func wilson95(f stats.Fraction) *stats.Interval {
	if f.N == 0 {
		return nil
	}
	iv, err := stats.ProportionCI(f.X, f.N, 0.95, stats.Wilson)
	if err != nil {
		return nil
	}
	return &iv
}
