package db

import (
	"context"
)

// Counts are the headline figures of the start page.
type Counts struct {
	Participants int64 // ever enrolled
	Active       int64 // enrolled and not withdrawn
	Sites        int64
	Withdrawn    int64
}

// Counts reads the headline figures in one round trip.
func (s *Store) Counts(ctx context.Context) (Counts, error) {
	var c Counts
	err := s.pool.QueryRow(ctx, `
		SELECT (SELECT count(*) FROM participants),
		       (SELECT count(*) FROM participants WHERE withdrawn_on IS NULL),
		       (SELECT count(*) FROM sites),
		       (SELECT count(*) FROM participants WHERE withdrawn_on IS NOT NULL)`).
		Scan(&c.Participants, &c.Active, &c.Sites, &c.Withdrawn)
	return c, mapErr("counts", err)
}

// StudyName returns the study's name, or "" before the study is set up.
func (s *Store) StudyName(ctx context.Context) (string, error) {
	var name string
	err := s.pool.QueryRow(ctx, `SELECT coalesce((SELECT name FROM study WHERE id = 1), '')`).Scan(&name)
	return name, mapErr("study name", err)
}
