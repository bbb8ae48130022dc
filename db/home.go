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

// Counts reads the headline figures from the sums kept as participants,
// cases and recordings change (enrolment_counts, case_counts,
// figure_unread_counts): one read whatever the study's size.
func (s *Store) Counts(ctx context.Context) (Counts, error) {
	c := Counts{Cases: map[followup.State]int64{}}
	q := s.reader(ctx)
	today, weeks, err := s.statusDay(ctx)
	if err != nil {
		return c, mapErr("counts", err)
	}
	if c.Status, c.Participants, err = keptByStatus(ctx, q, "true", nil, today, weeks); err != nil {
		return c, mapErr("counts", err)
	}
	rows, err := q.Query(ctx, `
		SELECT 'sites', count(*) FROM sites
		UNION ALL SELECT 'unread', coalesce(sum(n), 0) FROM figure_unread_counts
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
		case "sites":
			c.Sites = n
		case "unread":
			c.AwaitingRead = int(n)
		default:
			c.Cases[followup.State(key[len("case:"):])] = n
		}
	}
	return c, mapErr("counts", rows.Err())
}

// StudyName returns the study's name, or "" before the study is set up.
func (s *Store) StudyName(ctx context.Context) (string, error) {
	var name string
	err := s.reader(ctx).QueryRow(ctx, `SELECT coalesce((SELECT name FROM study WHERE id = 1), '')`).Scan(&name)
	return name, mapErr("study name", err)
}
