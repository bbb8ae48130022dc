package db

import (
	"context"
	"fmt"

	"cohortdesk/cohort"
	"cohortdesk/cohort/wear"

	"github.com/jackc/pgx/v5"
)

// WeekKey names one participant-week.
type WeekKey struct {
	ParticipantID int64
	Week          int
}

// decodeInto adds one stored series to w.
func decodeInto(w *cohort.Week, kind int16, data []byte) error {
	var dst *cohort.Samples
	switch cohort.Kind(kind) {
	case cohort.HeartRate:
		dst = &w.HR
	case cohort.Steps:
		dst = &w.Steps
	case cohort.RRInterval:
		dst = &w.RR
	default:
		return fmt.Errorf("db: wear kind %d unknown", kind)
	}
	return wear.DecodeInto(dst, data)
}

// WearWeek returns one participant-week of readings with its bounds, decoded.
// A week with no data is returned empty, not as an error.
func (s *Store) WearWeek(ctx context.Context, p Participant, week int) (cohort.Week, error) {
	w := emptyWeek(p, week)
	rows, err := s.reader(ctx).Query(ctx, `SELECT kind, data FROM wear_weeks WHERE participant_id = $1 AND week = $2 ORDER BY kind`, p.ID, week)
	if err != nil {
		return w, mapErr("wear week", err)
	}
	defer rows.Close()
	for rows.Next() {
		var kind int16
		var data []byte
		if err := rows.Scan(&kind, &data); err != nil {
			return w, mapErr("wear week", err)
		}
		if err := decodeInto(&w, kind, data); err != nil {
			return w, fmt.Errorf("db: participant %d week %d: %w", p.ID, week, err)
		}
	}
	return w, mapErr("wear week", rows.Err())
}

func emptyWeek(p Participant, week int) cohort.Week {
	start, end := cohort.WeekBounds(p.EnrolledOn, p.Location(), week)
	return cohort.Week{Week: week, Start: start.UnixMilli(), End: end.UnixMilli()}
}

// EachWearWeek streams every stored participant-week of the given participants
// (all participants when ids is empty), in participant and week order, decoded.
// fn must not keep the Week after it returns: its slices are reused.
func (s *Store) EachWearWeek(ctx context.Context, ids []int64, fn func(p Participant, w *cohort.Week) error) error {
	parts := map[int64]Participant{}
	var prows pgx.Rows
	var err error
	if len(ids) == 0 {
		prows, err = s.pool.Query(ctx, `SELECT `+participantCols+` FROM participants p JOIN sites st ON st.id = p.site_id`)
	} else {
		prows, err = s.pool.Query(ctx, `SELECT `+participantCols+` FROM participants p JOIN sites st ON st.id = p.site_id WHERE p.id = ANY($1)`, ids)
	}
	if err != nil {
		return mapErr("wear participants", err)
	}
	for prows.Next() {
		p, err := scanParticipant(prows)
		if err != nil {
			prows.Close()
			return mapErr("wear participants", err)
		}
		parts[p.ID] = p
	}
	if err := prows.Err(); err != nil {
		return mapErr("wear participants", err)
	}
	var rows pgx.Rows
	if len(ids) == 0 {
		rows, err = s.pool.Query(ctx, `SELECT participant_id, week, kind, data FROM wear_weeks ORDER BY participant_id, week, kind`)
	} else {
		rows, err = s.pool.Query(ctx, `SELECT participant_id, week, kind, data FROM wear_weeks WHERE participant_id = ANY($1) ORDER BY participant_id, week, kind`, ids)
	}
	if err != nil {
		return mapErr("wear weeks", err)
	}
	defer rows.Close()
	var cur cohort.Week
	var curP Participant
	have := false
	flush := func() error {
		if !have {
			return nil
		}
		return fn(curP, &cur)
	}
	for rows.Next() {
		var pid int64
		var week, kind int16
		var data []byte
		if err := rows.Scan(&pid, &week, &kind, &data); err != nil {
			return mapErr("wear weeks", err)
		}
		if !have || pid != curP.ID || int(week) != cur.Week {
			if err := flush(); err != nil {
				return err
			}
			p, ok := parts[pid]
			if !ok {
				return fmt.Errorf("db: wear weeks of unknown participant %d", pid)
			}
			curP, have = p, true
			hr, st, rr := cur.HR, cur.Steps, cur.RR
			cur = emptyWeek(p, int(week))
			// Reuse the buffers of the previous week.
			cur.HR = cohort.Samples{T: hr.T[:0], V: hr.V[:0]}
			cur.Steps = cohort.Samples{T: st.T[:0], V: st.V[:0], End: st.End[:0]}
			cur.RR = cohort.Samples{T: rr.T[:0], V: rr.V[:0]}
		}
		if err := decodeInto(&cur, kind, data); err != nil {
			return fmt.Errorf("db: participant %d week %d: %w", pid, week, err)
		}
	}
	if err := rows.Err(); err != nil {
		return mapErr("wear weeks", err)
	}
	return flush()
}
