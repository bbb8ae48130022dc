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

// Counts reads the headline figures from the sums kept as participants and
// cases change (enrolment_counts, case_counts): one read whatever the
// study's size.
func (s *Store) Counts(ctx context.Context) (Counts, error) {
	c := Counts{Cases: map[followup.State]int64{}}
	rows, err := s.reader(ctx).Query(ctx, `
		SELECT 'enrolled', coalesce(sum(n), 0) FROM enrolment_counts
		UNION ALL SELECT 'withdrawn', coalesce(sum(n), 0) FROM enrolment_counts WHERE withdrawn_on IS NOT NULL
		UNION ALL SELECT 'sites', count(*) FROM sites
		UNION ALL (SELECT 'case:' || state, sum(n) FROM case_counts GROUP BY state HAVING sum(n) <> 0)`)
	if err != nil {
		return c, mapErr("counts", err)
	}
	defer rows.Close()
	for rows.Next() {
		var key string
		var n int64
		if err := rows.Scan(&key, &n); err != nil {
			return c, mapErr("counts", err)
		}
		switch key {
		case "enrolled":
			c.Participants = n
		case "withdrawn":
			c.Withdrawn = n
		case "sites":
			c.Sites = n
		default:
			c.Cases[followup.State(key[len("case:"):])] = n
		}
	}
	c.Active = c.Participants - c.Withdrawn
	return c, mapErr("counts", rows.Err())
}

// StudyName returns the study's name, or "" before the study is set up.
func (s *Store) StudyName(ctx context.Context) (string, error) {
	var name string
	err := s.reader(ctx).QueryRow(ctx, `SELECT coalesce((SELECT name FROM study WHERE id = 1), '')`).Scan(&name)
	return name, mapErr("study name", err)
}
