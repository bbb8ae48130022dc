package db

import (
	"context"
	"errors"
	"fmt"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/overread"
	"cohortdesk/cohort/screen"
)

// SweepResult is a threshold sweep over every stored participant-week under
// one protocol version (stored with its run as JSON; the field names are the
// stored keys).
type SweepResult struct {
	Protocol ProtocolVersion
	screen.SweepAccuracy
}

// Sweep recomputes, for each value of one sweepable parameter of a protocol
// version, how many participant-weeks would flag and how the flag agrees with
// over-read ECGs (screen.SweepTally). Each week's readings are read once.
//
// At study scale this reads every stored reading, so the app runs it in the
// background (StartSweep); Sweep itself waits for the result.
func (s *Store) Sweep(ctx context.Context, protocolID int, param string, values []float64) (SweepResult, error) {
	return s.sweep(ctx, protocolID, param, values, nil)
}

// sweep is Sweep with progress: weeks swept out of weeks in all (may be nil).
func (s *Store) sweep(ctx context.Context, protocolID int, param string, values []float64, progress func(done, total int64) error) (SweepResult, error) {
	pv, err := s.Protocol(ctx, protocolID)
	if err != nil {
		return SweepResult{}, err
	}
	out := SweepResult{Protocol: pv}
	tally, err := screen.NewSweepTally(pv.Params, param, values, s.now().UnixMilli())
	var ve *cohort.ValidationError
	if errors.As(err, &ve) {
		return out, err
	}
	if err != nil {
		return out, fmt.Errorf("db: sweep %s: %w", pv.Label(), err)
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
	refs, err := s.referenceCases(ctx)
	if err != nil {
		return out, err
	}
	tally.Refer(refs)
	swept := 0
	err = s.EachWearWeek(ctx, nil, func(part Participant, w *cohort.Week) error {
		if err := tally.Add(part.ID, w); err != nil {
			return err
		}
		if n := tally.Swept(); n != swept {
			swept = n
			if err := progress(int64(n), total); err != nil {
				return err
			}
		}
		return ctx.Err()
	})
	if err == nil {
		out.SweepAccuracy, err = tally.Finish()
	}
	if err == nil && tally.Swept() != swept {
		err = progress(int64(tally.Swept()), total)
	}
	if err != nil {
		return out, fmt.Errorf("db: sweep %s %s: %w", pv.Label(), param, err)
	}
	return out, nil
}

// referenceCases reads every case with over-read recordings, with the weeks it
// covers and the conclusion of each such recording's readings: the sweep's
// reference standard (screen.ReferenceCase).
func (s *Store) referenceCases(ctx context.Context) ([]screen.ReferenceCase, error) {
	rows, err := s.pool.Query(ctx, `
		SELECT c.id, c.participant_id, c.first_week, c.last_week, o.recording_id, r.too_short, o.role, o.rhythm, o.confidence, o.read_on
		FROM over_reads o JOIN cases c ON c.id = o.case_id JOIN recordings r ON r.id = o.recording_id
		ORDER BY c.id, o.recording_id, o.id`)
	if err != nil {
		return nil, mapErr("sweep references", err)
	}
	defer rows.Close()
	var out []screen.ReferenceCase
	var caseID, recID int64 = -1, -1
	var readings []overread.Reading
	var tooShort bool
	settle := func() error {
		if len(readings) == 0 {
			return nil
		}
		v, err := overread.Resolve(readings)
		if err != nil {
			return fmt.Errorf("db: recording %d: %w", recID, err)
		}
		c := &out[len(out)-1]
		c.Recordings = append(c.Recordings, screen.ReferenceRecording{Conclusion: v, TooShort: tooShort})
		readings = readings[:0]
		return nil
	}
	for rows.Next() {
		var cid, pid, rid int64
		var first, last int
		var short bool
		var role, rhythm, conf string
		var on time.Time
		if err := rows.Scan(&cid, &pid, &first, &last, &rid, &short, &role, &rhythm, &conf, &on); err != nil {
			return nil, mapErr("sweep references", err)
		}
		if cid != caseID || rid != recID {
			if err := settle(); err != nil {
				return nil, err
			}
		}
		if cid != caseID {
			out = append(out, screen.ReferenceCase{ParticipantID: pid, FirstWeek: first, LastWeek: last})
		}
		caseID, recID, tooShort = cid, rid, short
		readings = append(readings, overread.Reading{Role: overread.Role(role), Rhythm: overread.Rhythm(rhythm),
			Confidence: overread.Confidence(conf), On: cohort.DateOf(on)})
	}
	if err := rows.Err(); err != nil {
		return nil, mapErr("sweep references", err)
	}
	if err := settle(); err != nil {
		return nil, err
	}
	return out, nil
}
