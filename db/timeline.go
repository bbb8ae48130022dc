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
	st, err := s.StudySettings(ctx)
	if err != nil {
		return nil, err
	}
	b := &pgx.Batch{}
	lines := queueTimeline(b, p, st, s.now())
	if err := s.readBatch(ctx, b, func(pgx.BatchResults) error { return nil }); err != nil {
		return nil, mapErr("timeline", err)
	}
	return lines(), nil
}

// queueTimeline queues the timeline's reads (the weeks, the cases and the
// recordings) on b; the function it returns lays out the weeks once the
// batch has been read.
func queueTimeline(b *pgx.Batch, p Participant, st StudySettings, now time.Time) func() []WeekLine {
	loc := p.Location()
	current := cohort.StudyWeek(p.EnrolledOn, loc, now)
	byWeek := map[int]*WeekLine{}
	maxWeek := current
	if p.WithdrawnOn != nil {
		maxWeek = cohort.StudyWeek(p.EnrolledOn, loc, p.WithdrawnOn.In(loc))
	}
	if fw := st.FollowUpWeeks; fw > 0 && maxWeek > fw-1 {
		maxWeek = fw - 1 // weeks after the participant's follow-up are not due
	}
	type caseSpan struct {
		id     int64
		state  string
		fw, lw int16
	}
	var spans []caseSpan
	var taken []time.Time
	b.Queue(`
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
		ORDER BY 1`, p.ID).Query(func(rows pgx.Rows) error {
		for rows.Next() {
			var l WeekLine
			var week int16
			var hours float32
			if err := rows.Scan(&week, &l.Readings, &l.HRCount, &l.RRCount, &hours, &l.Verdict, &l.Reason); err != nil {
				return err
			}
			l.Week, l.WearHours = int(week), float64(hours)
			byWeek[l.Week] = &l
			if l.Week > maxWeek {
				maxWeek = l.Week
			}
		}
		return rows.Err()
	})
	// Cases and recordings mark the weeks they cover.
	b.Queue(`SELECT id, state, first_week, last_week FROM cases WHERE participant_id = $1 ORDER BY id`, p.ID).Query(func(rows pgx.Rows) error {
		for rows.Next() {
			var c caseSpan
			if err := rows.Scan(&c.id, &c.state, &c.fw, &c.lw); err != nil {
				return err
			}
			spans = append(spans, c)
		}
		return rows.Err()
	})
	b.Queue(`SELECT taken_at FROM recordings WHERE participant_id = $1`, p.ID).Query(func(rows pgx.Rows) error {
		var err error
		taken, err = pgx.CollectRows(rows, pgx.RowTo[time.Time])
		return err
	})
	return func() []WeekLine {
		out := make([]WeekLine, 0, maxWeek+1)
		for w := 0; w <= maxWeek; w++ {
			if l, ok := byWeek[w]; ok {
				out = append(out, *l)
			} else {
				out = append(out, WeekLine{Week: w})
			}
		}
		for _, c := range spans {
			for w := int(c.fw); w <= int(c.lw) && w < len(out); w++ {
				if w >= 0 {
					out[w].CaseID, out[w].CaseState = c.id, followup.State(c.state)
				}
			}
		}
		for _, at := range taken {
			if w := cohort.StudyWeek(p.EnrolledOn, loc, at); w >= 0 && w < len(out) {
				out[w].ECG++
			}
		}
		return out
	}
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
	rows, err := s.reader(ctx).Query(ctx, notesSQL, participantID)
	if err != nil {
		return nil, mapErr("notes", err)
	}
	out, err := pgx.CollectRows(rows, scanNote)
	return out, mapErr("notes", err)
}

// notesSQL reads a participant's ($1) notes for scanNote, newest first.
const notesSQL = `SELECT id, body, actor, created_at FROM participant_notes WHERE participant_id = $1 ORDER BY created_at DESC, id DESC`

func scanNote(r pgx.CollectableRow) (Note, error) {
	var n Note
	err := r.Scan(&n.ID, &n.Body, &n.Actor, &n.At)
	return n, err
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
