package db

// The reference computations of the kept figures, for tests only: each
// reads every row it needs from the study's own tables and counts it with
// the same rules (cohort/cascade) as the kept figures, the way the pages
// did before the figures were kept (figures.go, figures_keep.go).

import (
	"context"
	"strconv"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/cascade"
	"cohortdesk/cohort/enrolment"
	"cohortdesk/cohort/followup"
	"cohortdesk/cohort/overread"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgtype"
)

// figureRows reads, in one read-only snapshot, the participants chosen by f
// with their screening flags under the chosen version, all their cases, the
// cases' recordings and the conclusions of their readings.
func (s *Store) figureRows(ctx context.Context, f cascade.Filter) (cascade.Rows, error) {
	var out cascade.Rows
	st, err := s.StudySettings(ctx)
	if err != nil {
		return out, err
	}
	out.Loc = st.Location()
	asOf := f.AsOf
	if asOf.IsZero() {
		asOf = s.now()
	}
	out.AsOf = cohort.DateOf(asOf.In(out.Loc))
	err = pgx.BeginTxFunc(ctx, s.pool, pgx.TxOptions{AccessMode: pgx.ReadOnly, IsoLevel: pgx.RepeatableRead}, func(tx pgx.Tx) error {
		rows, err := tx.Query(ctx, `SELECT id, name, version, active FROM protocols ORDER BY name, version, id`)
		if err != nil {
			return err
		}
		out.Versions, err = pgx.CollectRows(rows, func(r pgx.CollectableRow) (cascade.ProtocolRef, error) {
			var p cascade.ProtocolRef
			err := r.Scan(&p.ID, &p.Name, &p.Version, &p.Active)
			return p, err
		})
		if err != nil {
			return err
		}
		if out.Protocol, err = cascade.ChooseProtocol(out.Versions, f.ProtocolID); err != nil {
			return err
		}
		var from, to *string
		if !f.From.IsZero() {
			d := cohort.DateOf(f.From).String()
			from = &d
		}
		if !f.To.IsZero() {
			d := cohort.DateOf(f.To).String()
			to = &d
		}
		// The chosen participants, as a condition every query below repeats.
		const chosen = `($1 = 0 OR p.site_id = $1) AND ($2::date IS NULL OR p.enrolled_on >= $2::date) AND ($3::date IS NULL OR p.enrolled_on < $3::date)`
		rows, err = tx.Query(ctx, `
			WITH sr AS (
			  SELECT participant_id, bool_or(verdict <> 'insufficient') AS sufficient, bool_or(verdict = 'positive') AS positive
			  FROM screen_results WHERE protocol_id = $4 GROUP BY participant_id)
			SELECT p.id, st.code, p.sex, p.age_at_enrolment, p.withdrawn_on IS NOT NULL, coalesce(sr.sufficient, false), coalesce(sr.positive, false)
			FROM participants p JOIN sites st ON st.id = p.site_id LEFT JOIN sr ON sr.participant_id = p.id
			WHERE `+chosen+` ORDER BY p.id`, f.SiteID, from, to, out.Protocol.ID)
		if err != nil {
			return err
		}
		out.People, err = pgx.CollectRows(rows, func(r pgx.CollectableRow) (cascade.Person, error) {
			var p cascade.Person
			var sex string
			var age *int16
			err := r.Scan(&p.ID, &p.Site, &sex, &age, &p.Withdrawn, &p.Sufficient, &p.Positive)
			p.Sex = cohort.Sex(sex)
			if age != nil {
				a := int(*age)
				p.Age = &a
			}
			return p, err
		})
		if err != nil {
			return err
		}
		rows, err = tx.Query(ctx, `
			SELECT c.id, c.participant_id, c.protocol_id, c.state, c.flagged_at, c.reached_at, c.closed_at
			FROM cases c JOIN participants p ON p.id = c.participant_id WHERE `+chosen+` ORDER BY c.id`, f.SiteID, from, to)
		if err != nil {
			return err
		}
		out.Episodes, err = pgx.CollectRows(rows, func(r pgx.CollectableRow) (cascade.Episode, error) {
			var e cascade.Episode
			var state string
			var reached, closed *time.Time
			err := r.Scan(&e.CaseID, &e.ParticipantID, &e.ProtocolID, &state, &e.Flagged, &reached, &closed)
			e.State, e.ReachedAt, e.ClosedAt = followup.State(state), timeOf(reached), timeOf(closed)
			return e, err
		})
		if err != nil {
			return err
		}
		byCase := make(map[int64]int, len(out.Episodes))
		for i, e := range out.Episodes {
			byCase[e.CaseID] = i
		}
		rows, err = tx.Query(ctx, `
			SELECT r.id, r.case_id, r.auto_interpretation, r.too_short
			FROM recordings r JOIN participants p ON p.id = r.participant_id WHERE `+chosen+` ORDER BY r.taken_at, r.id`, f.SiteID, from, to)
		if err != nil {
			return err
		}
		type recRow struct {
			caseID int64
			rec    cascade.Recording
		}
		recs, err := pgx.CollectRows(rows, func(r pgx.CollectableRow) (recRow, error) {
			var x recRow
			var auto string
			err := r.Scan(&x.rec.ID, &x.caseID, &auto, &x.rec.TooShort)
			x.rec.Auto = overread.Auto(auto)
			return x, err
		})
		if err != nil {
			return err
		}
		recIDs := make([]int64, len(recs))
		for i, x := range recs {
			recIDs[i] = x.rec.ID
		}
		readings, err := readingsOf(ctx, tx, recIDs)
		if err != nil {
			return err
		}
		for _, x := range recs {
			if x.rec.Conclusion, err = conclusionOf(x.rec.ID, readings[x.rec.ID]); err != nil {
				return err
			}
			e := &out.Episodes[byCase[x.caseID]]
			e.Recordings = append(e.Recordings, x.rec)
		}
		return nil
	})
	return out, mapErr("figures", err)
}

// RecountFigures is the reference for the kept figures: the cascade and the
// agreement statistics counted by cohort/cascade from every row of the
// study, read whole, as the pages did before the figures were kept.
func (s *Store) RecountFigures(ctx context.Context, f cascade.Filter) (cascade.Cascade, cascade.Agreement, error) {
	rows, err := s.figureRows(ctx, f)
	if err != nil {
		return cascade.Cascade{}, cascade.Agreement{}, err
	}
	a, err := rows.Agreement()
	if err != nil {
		return cascade.Cascade{}, cascade.Agreement{}, err
	}
	return rows.Cascade(f), a, nil
}

// RecountEnrolment is Enrolment from every participant's row, each counted
// once by enrolment.Tally.
func (s *Store) RecountEnrolment(ctx context.Context, asOf cohort.Date) (enrolment.History, error) {
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
func (s *Store) RecountSufficiency(ctx context.Context) ([]SufficiencyWeek, error) {
	today, err := s.studyToday(ctx)
	if err != nil {
		return nil, err
	}
	var out []SufficiencyWeek
	err = s.recountTx(ctx, func(tx pgx.Tx) error {
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
func (s *Store) recountTx(ctx context.Context, fn func(pgx.Tx) error) error {
	return pgx.BeginTxFunc(ctx, s.pool, pgx.TxOptions{AccessMode: pgx.ReadOnly}, func(tx pgx.Tx) error {
		if _, err := tx.Exec(ctx, `SET LOCAL jit = off`); err != nil {
			return err
		}
		return fn(tx)
	})
}

// SilentParticipants lists active participants with no reading in the last
// days days, longest silence first.
func (s *Store) RecountSilent(ctx context.Context, days int) ([]SilentParticipant, error) {
	now := s.now()
	var out []SilentParticipant
	err := s.recountTx(ctx, func(tx pgx.Tx) error {
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

// RecountCounts is Counts from every row: participants by status, sites,
// recordings waiting for an over-read and cases by state.
func (s *Store) RecountCounts(ctx context.Context) (Counts, error) {
	var c Counts
	today, weeks, err := s.statusDay(ctx)
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

// Triage orders the cases still being worked by followup.Urgency at the
// store's now, in the study's time zone, counts every group, and returns the
// first perGroup cases of each urgent group in full (all of them when
// perGroup <= 0). Cases on schedule (followup.BucketOther) are counted, not
// returned: the triage page does not list them, the case list does.
//
// The order needs only a few fields of every case, so those are read for all
// cases and the full rows only for the cases returned: at 2,000 working cases
// this halves the time of the page. The reads need no common snapshot (a case
// changed in between shows as it now is), so they run outside a transaction.
func (s *Store) RecountTriage(ctx context.Context, perGroup int, me int64) (Triage, error) {
	var t Triage
	var items []followup.TriageItem
	err := func() error {
		var err error
		if t.Settings, err = studySettings(ctx, s.pool); err != nil {
			return err
		}
		rows, err := s.pool.Query(ctx, `
			SELECT c.id, p.study_id, c.state, coalesce(u.display_name, ''), coalesce(c.owner_id, 0), c.flagged_at, c.due_at,
			       coalesce(c.recording_back_at, rec.oldest), coalesce(rec.n, 0)
			FROM `+caseFrom+` WHERE c.closed_at IS NULL`)
		if err != nil {
			return err
		}
		defer rows.Close()
		for rows.Next() {
			var id, owner int64
			var it followup.TriageItem
			var state string
			var due, received pgtype.Timestamptz
			var n int
			if err := rows.Scan(&id, &it.StudyID, &state, &it.Owner, &owner, &it.FlaggedAt, &due, &received, &n); err != nil {
				return err
			}
			it.CaseID, it.State, it.Due, it.RecordingReceivedAt = strconv.FormatInt(id, 10), followup.State(state), due.Time, received.Time
			it.AwaitingReads, it.Mine = n, me != 0 && owner == me
			items = append(items, it)
			t.UnreadRecordings += n
		}
		return rows.Err()
	}()
	if err != nil {
		return t, mapErr("triage", err)
	}
	t.Now = s.now().In(t.Settings.Location())
	followup.SortTriage(items, t.Now)
	t.Counts = map[followup.Bucket]int{}
	var ids []int64
	var buckets []followup.Bucket
	for _, it := range items {
		b := followup.Urgency(it, t.Now).Bucket
		t.Counts[b]++
		if b != followup.BucketOther && (perGroup <= 0 || t.Counts[b] <= perGroup) {
			id, _ := strconv.ParseInt(it.CaseID, 10, 64)
			ids, buckets = append(ids, id), append(buckets, b)
		}
	}
	if len(ids) == 0 {
		return t, nil
	}
	rows, err := s.pool.Query(ctx, `SELECT `+caseCols+` FROM `+caseFrom+` WHERE c.id = ANY($1)`, ids)
	if err != nil {
		return t, mapErr("triage", err)
	}
	cases, err := pgx.CollectRows(rows, func(r pgx.CollectableRow) (Case, error) { return scanCase(r) })
	if err != nil {
		return t, mapErr("triage", err)
	}
	byID := make(map[int64]Case, len(cases))
	for _, c := range cases {
		byID[c.ID] = c
	}
	for i, id := range ids {
		if c, ok := byID[id]; ok { // a case closed in between drops out
			t.Rows = append(t.Rows, TriageRow{Case: c, Bucket: buckets[i]})
		}
	}
	return t, nil
}

// RecountParticipants counts the participants list's filter by status from
// every participant row, as the list did before the counts were kept.
func (s *Store) RecountParticipants(ctx context.Context, f ParticipantFilter) (map[cohort.ParticipantStatus]int64, int64, error) {
	day, weeks, err := s.statusDay(ctx)
	if err != nil {
		return nil, 0, err
	}
	where, args := f.where(s.now().UTC(), day, weeks)
	return participantsByStatus(ctx, s.pool, where, args, day, weeks)
}

// countAwaitingRead counts the recordings waiting for an over-read from the
// raw rows (the definition the kept figure_unread_counts must equal).
func countAwaitingRead(ctx context.Context, q querier) (int, error) {
	var n int
	err := q.QueryRow(ctx, `SELECT count(*) FROM recordings r JOIN cases c ON c.id = r.case_id WHERE `+awaitingRead).Scan(&n)
	return n, err
}
