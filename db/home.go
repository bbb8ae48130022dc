package db

import (
	"context"

	"cohortdesk/cohort/followup"
)

// Counts are the headline figures of the start page.
type Counts struct {
	Participants int64 // ever enrolled
	Active       int64 // enrolled and not withdrawn
	Sites        int64
	Withdrawn    int64
	// Cases counts every follow-up case by its state, the closed ones too.
	Cases map[followup.State]int64
}

// Counts reads the headline figures.
func (s *Store) Counts(ctx context.Context) (Counts, error) {
	var c Counts
	err := s.pool.QueryRow(ctx, `
		SELECT (SELECT count(*) FROM participants),
		       (SELECT count(*) FROM participants WHERE withdrawn_on IS NULL),
		       (SELECT count(*) FROM sites),
		       (SELECT count(*) FROM participants WHERE withdrawn_on IS NOT NULL)`).
		Scan(&c.Participants, &c.Active, &c.Sites, &c.Withdrawn)
	if err != nil {
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
