package db

import (
	"context"
	"time"

	"cohortdesk/cohort/followup"

	"github.com/jackc/pgx/v5"
)

// Deadlines: a case's next action and its due time are derived from the
// facts, the study's service levels and its calendar (followup.NextDue), at
// every edit and whenever the settings change.

// schedule sets the case's next action and deadline from the study's service
// levels and calendar; final cases have none.
func schedule(c *Case, attempts []Attempt, st StudySettings) {
	action, due, ok := followup.NextDue(facts(*c, attempts), st.Service, st.Calendar())
	if !ok {
		c.NextAction, c.DueAt = "", time.Time{}
		return
	}
	c.NextAction, c.DueAt = action, due
}

// rescheduleOpenCases recomputes the next action and deadline of every case
// still being worked under new settings. Deadlines are derived values, so the
// version does not change and no edit in progress is refused because of it.
// It returns how many deadlines changed.
func (s *Store) rescheduleOpenCases(ctx context.Context, tx pgx.Tx, st StudySettings) (int, error) {
	rows, err := tx.Query(ctx, `SELECT `+caseCols+` FROM `+caseFrom+` WHERE c.closed_at IS NULL ORDER BY c.id FOR UPDATE OF c`)
	if err != nil {
		return 0, err
	}
	cases, err := pgx.CollectRows(rows, func(r pgx.CollectableRow) (Case, error) { return scanCase(r) })
	if err != nil {
		return 0, err
	}
	byCase, err := attemptsOf(ctx, tx, `SELECT case_id, at, channel, outcome FROM contact_attempts
		WHERE case_id IN (SELECT id FROM cases WHERE closed_at IS NULL)`)
	if err != nil {
		return 0, err
	}
	n := 0
	for _, c := range cases {
		old := c
		schedule(&c, byCase[c.ID], st)
		if c.NextAction == old.NextAction && c.DueAt.Equal(old.DueAt) {
			continue
		}
		if _, err := tx.Exec(ctx, `UPDATE cases SET next_action = $2, due_at = $3 WHERE id = $1`, c.ID, string(c.NextAction), timeArg(c.DueAt)); err != nil {
			return 0, err
		}
		n++
	}
	return n, nil
}

// attemptsOf reads (case_id, at, channel, outcome) rows into attempts by case.
func attemptsOf(ctx context.Context, tx pgx.Tx, sql string, args ...any) (map[int64][]Attempt, error) {
	rows, err := tx.Query(ctx, sql, args...)
	if err != nil {
		return nil, err
	}
	defer rows.Close()
	out := map[int64][]Attempt{}
	for rows.Next() {
		var id int64
		var a Attempt
		var ch, o string
		if err := rows.Scan(&id, &a.At, &ch, &o); err != nil {
			return nil, err
		}
		a.Channel, a.Outcome = followup.Channel(ch), followup.Outcome(o)
		out[id] = append(out[id], a)
	}
	return out, rows.Err()
}

// RescheduleOpenCases recomputes the next action and deadline of every case
// still being worked from the stored settings, after cases were changed
// outside the usual edits (the demo loader dating its cases in the past).
func (s *Store) RescheduleOpenCases(ctx context.Context) (int, error) {
	st, err := s.StudySettings(ctx)
	if err != nil {
		return 0, err
	}
	var n int
	err = s.inTx(ctx, func(tx pgx.Tx) error {
		n, err = s.rescheduleOpenCases(ctx, tx, st)
		return err
	})
	return n, mapErr("reschedule cases", err)
}
