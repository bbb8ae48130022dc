package db

import (
	"context"
	"strconv"
	"strings"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/enrolment"
	"cohortdesk/cohort/followup"
	"cohortdesk/cohort/screen"

	"github.com/jackc/pgx/v5"
)

// WeekLine is one study week of a participant's timeline.
type WeekLine struct {
	Week      int
	Readings  int64 // all kinds
	HRCount   int64
	RRCount   int64
	WearHours float64        // from the screen result, when screened
	Verdict   screen.Verdict // "" when not screened
	Reason    string
	CaseID    int64 // a case covering this week
	CaseState followup.State
	ECG       int // recordings taken this week
}

// Timeline lists the participant's study weeks from enrolment to the last week
// with data (or to today's week), with the active protocol's verdicts.
func (s *Store) Timeline(ctx context.Context, p Participant) ([]WeekLine, error) {
	loc := p.Location()
	current := cohort.StudyWeek(p.EnrolledOn, loc, s.now())
	byWeek := map[int]*WeekLine{}
	maxWeek := current
	if p.WithdrawnOn != nil {
		maxWeek = cohort.StudyWeek(p.EnrolledOn, loc, p.WithdrawnOn.In(loc))
	}
	var fw int16
	if err := s.pool.QueryRow(ctx, `SELECT coalesce((SELECT follow_up_weeks FROM study WHERE id = 1), 0)`).Scan(&fw); err != nil {
		return nil, mapErr("timeline", err)
	}
	if fw > 0 && maxWeek > int(fw)-1 {
		maxWeek = int(fw) - 1 // weeks after the participant's follow-up are not due
	}
	rows, err := s.pool.Query(ctx, `
		WITH w AS (
		  SELECT week, sum(n) AS n, sum(n) FILTER (WHERE kind = 1) AS hr, sum(n) FILTER (WHERE kind = 3) AS rr
		  FROM wear_weeks WHERE participant_id = $1 GROUP BY week
		), r AS (
		  SELECT sr.week, sr.verdict, sr.reason, sr.wear_hours
		  FROM screen_results sr JOIN protocols pr ON pr.id = sr.protocol_id AND pr.active
		  WHERE sr.participant_id = $1
		)
		SELECT coalesce(w.week, r.week), coalesce(w.n, 0), coalesce(w.hr, 0), coalesce(w.rr, 0),
		       coalesce(r.wear_hours, 0), coalesce(r.verdict, ''), coalesce(r.reason, '')
		FROM w FULL JOIN r ON r.week = w.week
		ORDER BY 1`, p.ID)
	if err != nil {
		return nil, mapErr("timeline", err)
	}
	for rows.Next() {
		var l WeekLine
		var week int16
		var hours float32
		if err := rows.Scan(&week, &l.Readings, &l.HRCount, &l.RRCount, &hours, &l.Verdict, &l.Reason); err != nil {
			rows.Close()
			return nil, mapErr("timeline", err)
		}
		l.Week, l.WearHours = int(week), float64(hours)
		byWeek[l.Week] = &l
		if l.Week > maxWeek {
			maxWeek = l.Week
		}
	}
	if err := rows.Err(); err != nil {
		return nil, mapErr("timeline", err)
	}
	out := make([]WeekLine, 0, maxWeek+1)
	for w := 0; w <= maxWeek; w++ {
		if l, ok := byWeek[w]; ok {
			out = append(out, *l)
		} else {
			out = append(out, WeekLine{Week: w})
		}
	}
	// Cases and recordings mark the weeks they cover.
	crow, err := s.pool.Query(ctx, `SELECT id, state, first_week, last_week FROM cases WHERE participant_id = $1 ORDER BY id`, p.ID)
	if err != nil {
		return nil, mapErr("timeline cases", err)
	}
	for crow.Next() {
		var id int64
		var state string
		var fw, lw int16
		if err := crow.Scan(&id, &state, &fw, &lw); err != nil {
			crow.Close()
			return nil, mapErr("timeline cases", err)
		}
		for w := int(fw); w <= int(lw) && w < len(out); w++ {
			if w >= 0 {
				out[w].CaseID, out[w].CaseState = id, followup.State(state)
			}
		}
	}
	if err := crow.Err(); err != nil {
		return nil, mapErr("timeline cases", err)
	}
	rrow, err := s.pool.Query(ctx, `SELECT taken_at FROM recordings WHERE participant_id = $1`, p.ID)
	if err != nil {
		return nil, mapErr("timeline recordings", err)
	}
	for rrow.Next() {
		var at time.Time
		if err := rrow.Scan(&at); err != nil {
			rrow.Close()
			return nil, mapErr("timeline recordings", err)
		}
		if w := cohort.StudyWeek(p.EnrolledOn, loc, at); w >= 0 && w < len(out) {
			out[w].ECG++
		}
	}
	return out, mapErr("timeline recordings", rrow.Err())
}

// Note is a free-text note on a participant. Notes never leave the system.
type Note struct {
	ID    int64
	Body  string
	Actor string
	At    time.Time
}

// Notes lists a participant's notes, newest first.
func (s *Store) Notes(ctx context.Context, participantID int64) ([]Note, error) {
	rows, err := s.pool.Query(ctx, `SELECT id, body, actor, created_at FROM participant_notes WHERE participant_id = $1 ORDER BY created_at DESC, id DESC`, participantID)
	if err != nil {
		return nil, mapErr("notes", err)
	}
	out, err := pgx.CollectRows(rows, func(r pgx.CollectableRow) (Note, error) {
		var n Note
		err := r.Scan(&n.ID, &n.Body, &n.Actor, &n.At)
		return n, err
	})
	return out, mapErr("notes", err)
}

// AddNote stores a note and audits it.
func (s *Store) AddNote(ctx context.Context, a cohort.Actor, participantID int64, body string) error {
	body = strings.TrimSpace(body)
	if err := enrolment.CheckNote(body); err != nil {
		return err
	}
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		var id int64
		var actorID *int64
		if a.UserID != 0 {
			actorID = &a.UserID
		}
		if err := tx.QueryRow(ctx, `INSERT INTO participant_notes (participant_id, body, actor_id, actor) VALUES ($1, $2, $3, $4) RETURNING id`,
			participantID, body, actorID, a.Label()).Scan(&id); err != nil {
			return err
		}
		return audit(ctx, tx, a, "participant.note", "participant", strconv.FormatInt(participantID, 10), nil,
			map[string]any{"note_id": id, "body": freeText("participant_notes", id, "body", body)})
	})
	return mapErr("add note", err)
}
