package db

import (
	"context"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
)

// Counts are the headline figures of the start page.
type Counts struct {
	Participants int64 // ever enrolled
	// Status counts the participants by cohort.StatusOf today: active,
	// completed, withdrawn.
	Status map[cohort.ParticipantStatus]int64
	Sites  int64
	// Cases counts every follow-up case by its state, the closed ones too.
	Cases map[followup.State]int64
	// AwaitingRead counts the recordings waiting for an over-read
	// (overread.Awaits).
	AwaitingRead int
}

// Counts reads the headline figures.
func (s *Store) Counts(ctx context.Context) (Counts, error) {
	var c Counts
	today, weeks, err := s.statusDay(ctx, s.pool)
	if err != nil {
		return c, mapErr("counts", err)
	}
	if c.Status, c.Participants, err = participantsByStatus(ctx, s.pool, "true", nil, today, weeks); err != nil {
		return c, mapErr("counts", err)
	}
	if err := s.pool.QueryRow(ctx, `SELECT count(*) FROM sites`).Scan(&c.Sites); err != nil {
		return c, mapErr("counts", err)
	}
	if c.AwaitingRead, err = countAwaitingRead(ctx, s.pool); err != nil {
		return c, mapErr("counts", err)
	}
	rows, err := s.pool.Query(ctx, `SELECT state, count(*) FROM cases GROUP BY state`)
	if err != nil {
		return c, mapErr("case counts", err)
	}
	defer rows.Close()
	c.Cases = map[followup.State]int64{}
	for rows.Next() {
		var st string
		var n int64
		if err := rows.Scan(&st, &n); err != nil {
			return c, mapErr("case counts", err)
		}
		c.Cases[followup.State(st)] = n
	}
	return c, mapErr("case counts", rows.Err())
}

// StudyName returns the study's name, or "" before the study is set up.
func (s *Store) StudyName(ctx context.Context) (string, error) {
	var name string
	err := s.pool.QueryRow(ctx, `SELECT coalesce((SELECT name FROM study WHERE id = 1), '')`).Scan(&name)
	return name, mapErr("study name", err)
}
