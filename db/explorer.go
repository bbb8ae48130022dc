package db

import (
	"context"
	"fmt"
	"math"

	"cohortdesk/cohort"
	"cohortdesk/cohort/screen"
	"cohortdesk/cohort/stats"
)

// Over-read labels of a participant-week, from the cases covering it.
const (
	labelNone            = iota // no case with an over-read covers the week
	labelPending                // readers disagree and no adjudication yet
	labelUninterpretable        // the recordings could not be read
	labelNotAF                  // over-read as sinus, flutter or another rhythm
	labelAF                     // over-read as atrial fibrillation: confirmed
)

// ExploreRow is the outcome of one value of the swept parameter.
type ExploreRow struct {
	Value   float64
	Flagged int // screen-positive weeks among all screened weeks
	// Table counts the weeks with an adjudicated over-read: TP flagged and
	// AF, FP flagged and not AF, FN not flagged but AF, TN neither.
	Table stats.Table2x2
	// PPV is confirmed among flagged, Sensitivity flagged among confirmed,
	// both over weeks with an adjudicated over-read, with Wilson 95% intervals
	// (nil when the denominator is 0).
	PPV, Sensitivity     stats.Fraction
	PPVCI, SensitivityCI *stats.Interval
}

// Exploration is a threshold sweep over every stored participant-week.
type Exploration struct {
	Protocol ProtocolVersion
	Param    string
	Rows     []ExploreRow
	// Weeks is the number of participant-weeks screened per value.
	Weeks int
	// Over-read labels of the weeks: adjudicated AF and not AF (the PPV and
	// sensitivity denominators come from these), uninterpretable and pending
	// (reported, never silently dropped).
	ConfirmedWeeks, NotAFWeeks, UninterpretableWeeks, PendingWeeks int
}

// MaxExploreValues bounds the values of one sweep.
const MaxExploreValues = 50

// exploreChunk is how many prepared weeks are held at once: enough to amortise
// the sweep, few enough (about 60 kB each) to keep memory small for any cohort.
const exploreChunk = 256

// Explore recomputes, for each value of one sweepable parameter of a protocol
// version, how many participant-weeks would flag and how the flag agrees with
// over-read ECGs. Each week's readings are read and prepared once per request
// and every value is evaluated on the prepared summaries (screen.Sweep), so a
// sweep of 20 values costs little more than one. Personal baselines, when the
// version uses them, come from the version's own baseline-week results and are
// not swept.
//
// At study scale this reads every stored reading, so the app runs it in the
// background (StartExploration); Explore itself waits for the result.
func (s *Store) Explore(ctx context.Context, protocolID int, param string, values []float64) (Exploration, error) {
	return s.explore(ctx, protocolID, param, values, nil)
}

// checkSweep refuses a sweep that cannot run: no values or too many, a value
// that is not a finite number, a parameter the protocol does not have, or a
// value that makes the protocol invalid. The fields named are the form's.
func checkSweep(p screen.Protocol, param string, values []float64) error {
	var ve cohort.ValidationError
	if len(values) == 0 || len(values) > MaxExploreValues {
		ve.Add("values", fmt.Sprintf("give 1 to %d values", MaxExploreValues))
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

// explore is Explore with progress: weeks swept out of weeks in all (may be
// nil).
func (s *Store) explore(ctx context.Context, protocolID int, param string, values []float64, progress func(done, total int64) error) (Exploration, error) {
	pv, err := s.Protocol(ctx, protocolID)
	if err != nil {
		return Exploration{}, err
	}
	p := pv.Params
	out := Exploration{Protocol: pv, Param: param}
	if err := checkSweep(p, param, values); err != nil {
		return out, err
	}
	if err := p.Validate(); err != nil {
		return out, fmt.Errorf("db: explore %s: %w", pv.Label(), err)
	}
	if progress == nil {
		progress = func(int64, int64) error { return nil }
	}
	total, err := s.countWeeks(ctx, nil)
	if err != nil {
		return out, err
	}
	if err := progress(0, total); err != nil {
		return out, err
	}
	labels, err := s.overReadLabels(ctx)
	if err != nil {
		return out, err
	}
	out.Rows = make([]ExploreRow, len(values))
	for i, v := range values {
		out.Rows[i].Value = v
	}

	now := s.now().UnixMilli()
	var chunk []*screen.Prepared
	var bases []*screen.Baseline
	var keys []WeekKey
	sweep := func() error {
		if len(chunk) == 0 {
			return nil
		}
		verdicts, err := screen.Sweep(chunk, bases, p, param, values)
		if err != nil {
			return err
		}
		for vi, vs := range verdicts {
			row := &out.Rows[vi]
			for wi, v := range vs {
				flagged := v == screen.Positive
				if flagged {
					row.Flagged++
				}
				switch labels[keys[wi]] {
				case labelAF:
					if flagged {
						row.Table.TP++
					} else {
						row.Table.FN++
					}
				case labelNotAF:
					if flagged {
						row.Table.FP++
					} else {
						row.Table.TN++
					}
				}
			}
		}
		for _, k := range keys {
			switch labels[k] {
			case labelAF:
				out.ConfirmedWeeks++
			case labelNotAF:
				out.NotAFWeeks++
			case labelUninterpretable:
				out.UninterpretableWeeks++
			case labelPending:
				out.PendingWeeks++
			}
		}
		out.Weeks += len(chunk)
		chunk, bases, keys = chunk[:0], bases[:0], keys[:0]
		return progress(int64(out.Weeks), total)
	}

	// One participant's weeks arrive together and in week order, so the
	// baseline weeks are prepared before the weeks that use them.
	var cur int64 = -1
	var partWeeks []*screen.Prepared
	var partKeys []WeekKey
	flushParticipant := func() error {
		var base *screen.Baseline
		if p.Baseline.Enabled {
			var first []screen.Result
			for _, pr := range partWeeks {
				if pr.Week() < p.Baseline.Weeks {
					res, err := screen.Evaluate(pr, p, nil)
					if err != nil {
						return err
					}
					first = append(first, res)
				}
			}
			b, err := screen.NewBaseline(p, first)
			if err != nil {
				return err
			}
			base = b
		}
		for i, pr := range partWeeks {
			chunk = append(chunk, pr)
			keys = append(keys, partKeys[i])
			var b *screen.Baseline
			if base != nil && pr.Week() >= p.Baseline.Weeks {
				b = base
			}
			bases = append(bases, b)
		}
		partWeeks, partKeys = partWeeks[:0], partKeys[:0]
		if len(chunk) >= exploreChunk {
			return sweep()
		}
		return nil
	}
	err = s.EachWearWeek(ctx, nil, func(part Participant, w *cohort.Week) error {
		if part.ID != cur {
			if err := flushParticipant(); err != nil {
				return err
			}
			cur = part.ID
		}
		cleaned, _ := screen.Clean(w, p, now)
		partWeeks = append(partWeeks, screen.Prepare(&cleaned, p))
		partKeys = append(partKeys, WeekKey{ParticipantID: part.ID, Week: w.Week})
		return ctx.Err()
	})
	if err == nil {
		err = flushParticipant()
	}
	if err == nil {
		err = sweep()
	}
	if err != nil {
		return out, fmt.Errorf("db: explore %s %s: %w", pv.Label(), param, err)
	}
	for i := range out.Rows {
		r := &out.Rows[i]
		acc, err := stats.Diagnostic(r.Table)
		if err != nil {
			return out, fmt.Errorf("db: explore: %w", err)
		}
		r.PPV, r.Sensitivity = acc.PPV, acc.Sensitivity
		r.PPVCI = wilson(r.PPV)
		r.SensitivityCI = wilson(r.Sensitivity)
	}
	return out, nil
}

func wilson(f stats.Fraction) *stats.Interval {
	if f.N == 0 {
		return nil
	}
	iv, err := stats.ProportionCI(f.X, f.N, 0.95, stats.Wilson)
	if err != nil {
		return nil
	}
	return &iv
}

// overReadLabels labels the participant-weeks covered by a case whose
// recordings were over-read. A recording's rhythm is its adjudication, else
// its first read when no second read disagrees; a case is AF when any of its
// recordings is, else not AF when any was read as another rhythm, else
// uninterpretable, else pending. A week covered by several cases (of several
// protocol versions) takes the strongest label, AF first.
func (s *Store) overReadLabels(ctx context.Context) (map[WeekKey]int, error) {
	rows, err := s.pool.Query(ctx, `
		WITH rec AS (
		  SELECT case_id, recording_id,
		         coalesce(max(rhythm) FILTER (WHERE role = 'adjudication'),
		                  CASE WHEN count(*) FILTER (WHERE role = 'second') = 0
		                         OR max(rhythm) FILTER (WHERE role = 'first') = max(rhythm) FILTER (WHERE role = 'second')
		                       THEN max(rhythm) FILTER (WHERE role = 'first') END) AS rhythm
		  FROM over_reads GROUP BY case_id, recording_id
		), cs AS (
		  SELECT c.participant_id, c.first_week, c.last_week,
		         CASE WHEN bool_or(r.rhythm = 'af') THEN 4
		              WHEN bool_or(r.rhythm IN ('flutter', 'sinus', 'other')) THEN 3
		              WHEN bool_or(r.rhythm = 'uninterpretable') THEN 2
		              ELSE 1 END AS label
		  FROM cases c JOIN rec r ON r.case_id = c.id
		  GROUP BY c.id
		)
		SELECT participant_id, generate_series(first_week::int, last_week::int) AS week, label FROM cs`)
	if err != nil {
		return nil, mapErr("over-read labels", err)
	}
	defer rows.Close()
	out := map[WeekKey]int{}
	for rows.Next() {
		var k WeekKey
		var label int
		if err := rows.Scan(&k.ParticipantID, &k.Week, &label); err != nil {
			return nil, mapErr("over-read labels", err)
		}
		if label > out[k] {
			out[k] = label
		}
	}
	if err := rows.Err(); err != nil {
		return nil, mapErr("over-read labels", err)
	}
	return out, nil
}
