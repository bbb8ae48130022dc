package db

import (
	"context"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/enrolment"
	"cohortdesk/cohort/followup"

	"github.com/jackc/pgx/v5"
)

// studyToday is today's date in the study's time zone. Participant-weeks
// end at midnight there: in the hours when a new day has begun in UTC but
// not yet in the study's zone, no week has ended that day.
func (s *Store) studyToday(ctx context.Context) (cohort.Date, error) {
	st, err := s.StudySettings(ctx)
	if err != nil {
		return cohort.Date{}, err
	}
	return cohort.DateOf(s.now().In(st.Location())), nil
}

// Enrolment reads every site's enrolment counts as they stood at the end of
// the day asOf (enrolment.Tally counts them): participants enrolled later are
// left out, and withdrawals after it do not count. A zero asOf, or one after
// today (in the study's time zone), is today.
func (s *Store) Enrolment(ctx context.Context, asOf cohort.Date) (enrolment.History, error) {
	today, err := s.studyToday(ctx)
	if err != nil {
		return enrolment.History{}, err
	}
	if asOf.IsZero() || today.Before(asOf) {
		asOf = today
	}
	sites, err := s.Sites(ctx)
	if err != nil {
		return enrolment.History{}, err
	}
	rows, err := s.pool.Query(ctx, `
		SELECT site_id, enrolled_on, withdrawn_on IS NOT NULL AND withdrawn_on <= $1::date
		FROM participants WHERE enrolled_on <= $1::date ORDER BY enrolled_on`, asOf.String())
	if err != nil {
		return enrolment.History{}, mapErr("enrolment", err)
	}
	people, err := pgx.CollectRows(rows, func(r pgx.CollectableRow) (enrolment.Enrolled, error) {
		var e enrolment.Enrolled
		var on time.Time
		err := r.Scan(&e.Site, &on, &e.Withdrawn)
		e.On = cohort.DateOf(on)
		return e, err
	})
	if err != nil {
		return enrolment.History{}, mapErr("enrolment", err)
	}
	targets := make([]enrolment.Site, len(sites))
	for i, st := range sites {
		targets[i] = enrolment.Site{ID: st.ID, Code: st.Code, Name: st.Name, Target: st.Target}
	}
	return enrolment.Tally(asOf, targets, people), nil
}

// SufficiencyWeek is the share of active participants whose study week, ending
// in this calendar week, had enough usable wear under the active protocol.
type SufficiencyWeek struct {
	Week       cohort.Date // Monday of the calendar week in which the study weeks end
	Active     int         // participant-weeks due (enrolled, not withdrawn, week complete)
	Sufficient int         // of those, screened as positive or negative (not "insufficient" or missing)
}

// DataSufficiency counts, per calendar week, complete participant-weeks and
// those with enough wear. A participant-week with no data at all counts as
// insufficient: silence is the commonest way to have too little data.
//
// A participant-week is due when it ended before today (in the study's time
// zone) and before any withdrawal, within the study's weeks of follow-up. The weeks due are
// counted from a series per participant and the weeks with a verdict from
// the screening results, each grouped by the calendar week in which the
// participant-week ends, then put side by side: joining a series per
// participant to the results row by row cost several times as much at
// 20,000 participants.
func (s *Store) DataSufficiency(ctx context.Context) ([]SufficiencyWeek, error) {
	today, err := s.studyToday(ctx)
	if err != nil {
		return nil, err
	}
	var out []SufficiencyWeek
	err = s.reportTx(ctx, func(tx pgx.Tx) error {
		// Participants enrolled on the same day and due until the same day
		// have the same weeks due, so the series runs once per such group.
		// Mondays are found by day arithmetic from a known Monday
		// (2000-01-03), cheaper than truncating timestamps.
		rows, err := tx.Query(ctx, `
			WITH params AS (SELECT $1::date AS today, coalesce((SELECT follow_up_weeks FROM study WHERE id = 1), 0) AS weeks),
			people AS (
			  SELECT p.enrolled_on, least(coalesce(p.withdrawn_on, params.today), params.today) AS until, count(*) AS n
			  FROM participants p CROSS JOIN params GROUP BY 1, 2),
			due AS (
			  SELECT d.last_day - (d.last_day - date '2000-01-03') % 7 AS monday, sum(g.n) AS due
			  FROM people g CROSS JOIN params
			  CROSS JOIN LATERAL generate_series(0, (g.until - g.enrolled_on) / 7 - 1) AS w(n)
			  CROSS JOIN LATERAL (SELECT g.enrolled_on + (w.n + 1) * 7 - 1 AS last_day) d
			  WHERE params.weeks = 0 OR w.n < params.weeks
			  GROUP BY 1),
			verdicts AS (
			  SELECT p.enrolled_on, sr.week, count(*) AS n
			  FROM screen_results sr JOIN participants p ON p.id = sr.participant_id CROSS JOIN params
			  WHERE sr.protocol_id = (SELECT id FROM protocols WHERE active) AND sr.verdict IN ('positive', 'negative')
			    AND sr.week >= 0 AND p.enrolled_on + (sr.week + 1) * 7 <= least(coalesce(p.withdrawn_on, params.today), params.today)
			    AND (params.weeks = 0 OR sr.week < params.weeks)
			  GROUP BY 1, 2),
			enough AS (
			  SELECT d.last_day - (d.last_day - date '2000-01-03') % 7 AS monday, sum(v.n) AS sufficient
			  FROM verdicts v CROSS JOIN LATERAL (SELECT v.enrolled_on + (v.week + 1) * 7 - 1 AS last_day) d
			  GROUP BY 1)
			SELECT due.monday, due.due, coalesce(enough.sufficient, 0)
			FROM due LEFT JOIN enough ON enough.monday = due.monday ORDER BY 1`, today.String())
		if err != nil {
			return err
		}
		defer rows.Close()
		for rows.Next() {
			var w SufficiencyWeek
			var monday time.Time
			if err := rows.Scan(&monday, &w.Active, &w.Sufficient); err != nil {
				return err
			}
			w.Week = cohort.DateOf(monday)
			out = append(out, w)
		}
		return rows.Err()
	})
	return out, mapErr("data sufficiency", err)
}

// reportTx runs fn in a read-only transaction without JIT compilation. The
// planner cannot know how many weeks each participant's series holds and
// guesses far too many, so on a large study it would compile these
// reporting queries to machine code, which took longer than running them
// (0.9 s of compiling for 0.5 s of work at 20,000 participants).
func (s *Store) reportTx(ctx context.Context, fn func(pgx.Tx) error) error {
	return pgx.BeginTxFunc(ctx, s.pool, pgx.TxOptions{AccessMode: pgx.ReadOnly}, func(tx pgx.Tx) error {
		if _, err := tx.Exec(ctx, `SET LOCAL jit = off`); err != nil {
			return err
		}
		return fn(tx)
	})
}

// SilentParticipant is an active participant whose watch has sent nothing for
// a while.
type SilentParticipant struct {
	ID         int64
	StudyID    string
	SiteCode   string
	EnrolledOn cohort.Date
	TimeZone   string     // the participant's, for study days
	LastData   *time.Time // nil: never sent anything
	Days       int        // whole days since the last reading (or since enrolment)
}

// Location is the participant's time zone (UTC when unreadable).
func (sp SilentParticipant) Location() *time.Location {
	return Participant{TimeZone: sp.TimeZone}.Location()
}

// SilentParticipants lists active participants with no reading in the last
// days days, longest silence first.
func (s *Store) SilentParticipants(ctx context.Context, days int) ([]SilentParticipant, error) {
	now := s.now()
	var out []SilentParticipant
	err := s.reportTx(ctx, func(tx pgx.Tx) error {
		rows, err := tx.Query(ctx, `
			SELECT p.id, p.study_id, st.code, last.ms, p.enrolled_on, p.time_zone
			FROM participants p JOIN sites st ON st.id = p.site_id
			LEFT JOIN LATERAL (SELECT max(last_ms) AS ms FROM wear_weeks w WHERE w.participant_id = p.id) last ON true
			WHERE p.withdrawn_on IS NULL
			  AND (coalesce((SELECT follow_up_weeks FROM study WHERE id = 1), 0) = 0
			       OR p.enrolled_on + 7 * (SELECT follow_up_weeks FROM study WHERE id = 1) > $2::date)
			  AND coalesce(last.ms, extract(epoch FROM p.enrolled_on::timestamptz) * 1000) < $1
			ORDER BY coalesce(last.ms, 0), p.study_id`, now.Add(-time.Duration(days)*24*time.Hour).UnixMilli(), now.UTC())
		if err != nil {
			return err
		}
		defer rows.Close()
		for rows.Next() {
			var sp SilentParticipant
			var ms *int64
			var enrolled time.Time
			if err := rows.Scan(&sp.ID, &sp.StudyID, &sp.SiteCode, &ms, &enrolled, &sp.TimeZone); err != nil {
				return err
			}
			sp.EnrolledOn = cohort.DateOf(enrolled)
			since := enrolled
			if ms != nil {
				t := time.UnixMilli(*ms).UTC()
				sp.LastData, since = &t, t
			}
			sp.Days = int(now.Sub(since).Hours() / 24)
			out = append(out, sp)
		}
		return rows.Err()
	})
	return out, mapErr("silent participants", err)
}

// CascadeMember is a participant as a box of the cascade lists them: study
// ID, site and their cases, nothing identifying.
type CascadeMember struct {
	ID         int64
	StudyID    string
	SiteCode   string
	EnrolledOn cohort.Date
	Withdrawn  bool
	Cases      []MemberCase // under the cascade's protocol version, oldest flag first
}

// MemberCase is one case of a CascadeMember.
type MemberCase struct {
	ID        int64
	State     followup.State
	FlaggedAt time.Time
	FirstWeek int
	LastWeek  int
}

// CascadeMembers reads the participants with the given ids, in the order
// given (ids not found are left out), each with their cases under protocol
// version protocolID. It counts nothing: the ids come from Cascade, which is
// the one place that decides who is in which box.
func (s *Store) CascadeMembers(ctx context.Context, protocolID int, ids []int64) ([]CascadeMember, error) {
	if len(ids) == 0 {
		return nil, nil
	}
	byID := make(map[int64]*CascadeMember, len(ids))
	err := pgx.BeginTxFunc(ctx, s.pool, pgx.TxOptions{AccessMode: pgx.ReadOnly, IsoLevel: pgx.RepeatableRead}, func(tx pgx.Tx) error {
		rows, err := tx.Query(ctx, `
			SELECT p.id, p.study_id, st.code, p.enrolled_on, p.withdrawn_on IS NOT NULL
			FROM participants p JOIN sites st ON st.id = p.site_id WHERE p.id = ANY($1)`, ids)
		if err != nil {
			return err
		}
		for rows.Next() {
			var m CascadeMember
			var on time.Time
			if err := rows.Scan(&m.ID, &m.StudyID, &m.SiteCode, &on, &m.Withdrawn); err != nil {
				rows.Close()
				return err
			}
			m.EnrolledOn = cohort.DateOf(on)
			byID[m.ID] = &m
		}
		if err := rows.Err(); err != nil {
			return err
		}
		rows, err = tx.Query(ctx, `
			SELECT id, participant_id, state, flagged_at, first_week, last_week
			FROM cases WHERE participant_id = ANY($1) AND protocol_id = $2 ORDER BY flagged_at, id`, ids, protocolID)
		if err != nil {
			return err
		}
		for rows.Next() {
			var c MemberCase
			var pid int64
			var state string
			var first, last int16
			if err := rows.Scan(&c.ID, &pid, &state, &c.FlaggedAt, &first, &last); err != nil {
				rows.Close()
				return err
			}
			c.State, c.FirstWeek, c.LastWeek = followup.State(state), int(first), int(last)
			if m := byID[pid]; m != nil {
				m.Cases = append(m.Cases, c)
			}
		}
		return rows.Err()
	})
	if err != nil {
		return nil, mapErr("cascade members", err)
	}
	out := make([]CascadeMember, 0, len(ids))
	for _, id := range ids {
		if m := byID[id]; m != nil {
			out = append(out, *m)
		}
	}
	return out, nil
}
