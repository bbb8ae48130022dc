package db

// Keeping the figures: each participant's standing in the cascade of every
// protocol version, each case's figures for the agreement statistics and each
// recording's cell of the kappa table are computed here with the rules of
// cohort/cascade and stored per participant (migration 0040). Triggers mark
// the participants whose rows a statement changed (figures_dirty); every
// transaction the store opens (inTx) computes the participants it marked
// before it commits, so a page read after the change shows it. Changes made
// outside the store (a bulk load by SQL) are computed by DrainFigures, run in
// the background (KeepFigures), and pages say how many participants wait.
// RebuildFigures computes everyone from scratch.

import (
	"context"
	"fmt"
	"strconv"
	"strings"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/cascade"
	"cohortdesk/cohort/followup"
	"cohortdesk/cohort/overread"

	"github.com/jackc/pgx/v5"
)

// figuresLockClass is the first key of the advisory locks that make the
// figures of one participant be computed by one transaction at a time.
const figuresLockClass = 15015

// keptPerson is one participant's rows as the kept figures need them.
type keptPerson struct {
	id        int64
	siteID    int
	site      string
	sex       cohort.Sex
	age       *int
	enrolled  time.Time
	withdrawn *time.Time
	flags     map[int]verdictFlags // by protocol version
	episodes  []cascade.Episode    // every version's cases, in case order
	notNeeded map[int64]bool       // recordings marked as needing no over-read
}

// verdictFlags are a participant's screening results under one version.
type verdictFlags struct {
	sufficient, positive bool
	weeks                []int16 // weeks with a positive or negative verdict
}

// keptQueries read the rows of the participants that match cond, in which %s
// stands for the participant id column.
func keptQueries(b *pgx.Batch, cond string, args ...any) {
	w := func(col string) string { return fmt.Sprintf(cond, col) }
	b.Queue(`SELECT coalesce((SELECT time_zone FROM study WHERE id = 1), 'UTC')`)
	b.Queue(`SELECT p.id, p.site_id, st.code, p.sex, p.age_at_enrolment, p.enrolled_on, p.withdrawn_on
		FROM participants p JOIN sites st ON st.id = p.site_id WHERE `+w("p.id")+` ORDER BY p.id`, args...)
	b.Queue(`SELECT participant_id, protocol_id, bool_or(verdict <> 'insufficient'), bool_or(verdict = 'positive'),
		       coalesce(array_agg(week ORDER BY week) FILTER (WHERE verdict <> 'insufficient'), '{}')
		FROM screen_results WHERE `+w("participant_id")+` GROUP BY 1, 2`, args...)
	b.Queue(`SELECT id, participant_id, protocol_id, state, flagged_at, reached_at, closed_at
		FROM cases WHERE `+w("participant_id")+` ORDER BY id`, args...)
	b.Queue(`SELECT id, case_id, participant_id, auto_interpretation, too_short, read_not_needed_at IS NOT NULL
		FROM recordings WHERE `+w("participant_id")+` ORDER BY taken_at, id`, args...)
	b.Queue(`SELECT id, recording_id, role, rhythm, confidence, coalesce(reader_id, 0), reader, read_on, comment, created_by, created_at
		FROM over_reads WHERE `+w("participant_id")+` ORDER BY recording_id, id`, args...)
}

// readKept reads the results of keptQueries, queued last in the batch.
func readKept(br pgx.BatchResults) ([]*keptPerson, *time.Location, error) {
	var zone string
	if err := br.QueryRow().Scan(&zone); err != nil {
		return nil, nil, err
	}
	loc, err := time.LoadLocation(zone)
	if err != nil {
		loc = time.UTC
	}
	var people []*keptPerson
	byID := map[int64]*keptPerson{}
	rows, err := br.Query()
	if err != nil {
		return nil, nil, err
	}
	for rows.Next() {
		p := &keptPerson{flags: map[int]verdictFlags{}, notNeeded: map[int64]bool{}}
		var sex string
		var age *int16
		var enrolled time.Time
		if err := rows.Scan(&p.id, &p.siteID, &p.site, &sex, &age, &enrolled, &p.withdrawn); err != nil {
			rows.Close()
			return nil, nil, err
		}
		p.sex, p.enrolled = cohort.Sex(sex), enrolled
		if age != nil {
			a := int(*age)
			p.age = &a
		}
		people = append(people, p)
		byID[p.id] = p
	}
	if err := rows.Err(); err != nil {
		return nil, nil, err
	}
	if rows, err = br.Query(); err != nil {
		return nil, nil, err
	}
	for rows.Next() {
		var pid int64
		var proto int
		var f verdictFlags
		if err := rows.Scan(&pid, &proto, &f.sufficient, &f.positive, &f.weeks); err != nil {
			rows.Close()
			return nil, nil, err
		}
		if p := byID[pid]; p != nil {
			p.flags[proto] = f
		}
	}
	if err := rows.Err(); err != nil {
		return nil, nil, err
	}
	if rows, err = br.Query(); err != nil {
		return nil, nil, err
	}
	type at struct {
		p *keptPerson
		i int
	}
	byCase := map[int64]at{}
	for rows.Next() {
		var e cascade.Episode
		var state string
		var reached, closed *time.Time
		if err := rows.Scan(&e.CaseID, &e.ParticipantID, &e.ProtocolID, &state, &e.Flagged, &reached, &closed); err != nil {
			rows.Close()
			return nil, nil, err
		}
		e.State, e.ReachedAt, e.ClosedAt = followup.State(state), timeOf(reached), timeOf(closed)
		if p := byID[e.ParticipantID]; p != nil {
			p.episodes = append(p.episodes, e)
			byCase[e.CaseID] = at{p, len(p.episodes) - 1}
		}
	}
	if err := rows.Err(); err != nil {
		return nil, nil, err
	}
	if rows, err = br.Query(); err != nil {
		return nil, nil, err
	}
	type recAt struct {
		caseID int64
		rec    cascade.Recording
	}
	var recs []recAt
	for rows.Next() {
		var x recAt
		var pid int64
		var auto string
		var notNeeded bool
		if err := rows.Scan(&x.rec.ID, &x.caseID, &pid, &auto, &x.rec.TooShort, &notNeeded); err != nil {
			rows.Close()
			return nil, nil, err
		}
		x.rec.Auto = overread.Auto(auto)
		if p := byID[pid]; p != nil && notNeeded {
			p.notNeeded[x.rec.ID] = true
		}
		recs = append(recs, x)
	}
	if err := rows.Err(); err != nil {
		return nil, nil, err
	}
	if rows, err = br.Query(); err != nil {
		return nil, nil, err
	}
	readings, err := scanReadings(rows)
	if err != nil {
		return nil, nil, err
	}
	for _, x := range recs {
		if x.rec.Conclusion, err = conclusionOf(x.rec.ID, readings[x.rec.ID]); err != nil {
			return nil, nil, err
		}
		if a, ok := byCase[x.caseID]; ok {
			e := &a.p.episodes[a.i]
			e.Recordings = append(e.Recordings, x.rec)
		}
	}
	return people, loc, nil
}

// keptRows are the figure rows of a set of participants, as columns.
type keptRows struct {
	// figure_standings
	sPID, sEnrolled                 []int64
	sProto, sSite, sBox             []int32
	sEnrolledOn, sWithdrawn, sExit  []string
	sWeeks                          []string
	sWithdrawnNull                  []bool
	ePID, eCase                     []int64
	eProto, eSite, eStage, eDays    []int32
	eEnrolled, eSex, eBand, eFlag   []string
	eSettled, eUninterp, eEv, eClos []bool
	rPID, rRec                      []int64
	rProto, rSite                   []int32
	rEnrolled, rAuto, rRhythm       []string
	uPID                            []int64
	uUnread                         []int32
	// figure_waiting
	wPID, wCase []int64
	wN          []int32
}

// compute applies the rules of cohort/cascade to each participant's rows.
func (k *keptRows) compute(people []*keptPerson, loc *time.Location) {
	for _, p := range people {
		enrolled := cohort.DateOf(p.enrolled).String()
		withdrawn := ""
		if p.withdrawn != nil {
			withdrawn = cohort.DateOf(*p.withdrawn).String()
		}
		protos := map[int]bool{}
		for id := range p.flags {
			protos[id] = true
		}
		for _, e := range p.episodes {
			protos[e.ProtocolID] = true
		}
		for id := range protos {
			f := p.flags[id]
			person := cascade.Person{ID: p.id, Site: p.site, Sex: p.sex, Age: p.age, Withdrawn: p.withdrawn != nil,
				Sufficient: f.sufficient, Positive: f.positive}
			st := cascade.Stand(person, p.episodes, id)
			weeks := make([]string, len(f.weeks))
			for i, w := range f.weeks {
				weeks[i] = strconv.Itoa(int(w))
			}
			k.sPID, k.sProto, k.sSite = append(k.sPID, p.id), append(k.sProto, int32(id)), append(k.sSite, int32(p.siteID))
			k.sEnrolledOn, k.sWithdrawn, k.sWithdrawnNull = append(k.sEnrolledOn, enrolled), append(k.sWithdrawn, withdrawn), append(k.sWithdrawnNull, p.withdrawn == nil)
			k.sBox, k.sExit, k.sWeeks = append(k.sBox, int32(st.Box)), append(k.sExit, string(st.Exit)), append(k.sWeeks, "{"+strings.Join(weeks, ",")+"}")
		}
		band := cascade.AgeBand(p.age)
		unread := 0
		for _, e := range p.episodes {
			f := e.Figure(loc)
			k.ePID, k.eCase, k.eProto, k.eSite = append(k.ePID, p.id), append(k.eCase, e.CaseID), append(k.eProto, int32(e.ProtocolID)), append(k.eSite, int32(p.siteID))
			k.eEnrolled, k.eSex, k.eBand = append(k.eEnrolled, enrolled), append(k.eSex, string(p.sex)), append(k.eBand, band)
			k.eStage, k.eSettled, k.eUninterp = append(k.eStage, int32(f.Stage)), append(k.eSettled, f.Settled), append(k.eUninterp, f.Uninterpretable)
			k.eFlag, k.eEv, k.eClos, k.eDays = append(k.eFlag, f.FlagDay.String()), append(k.eEv, f.Event), append(k.eClos, f.Closed), append(k.eDays, int32(f.Days))
			waiting := 0
			for _, r := range e.Recordings {
				if overread.Awaits(r.Conclusion, !e.ClosedAt.IsZero() || e.State.Terminal(), p.notNeeded[r.ID]) {
					waiting++
				}
				if a, b, ok := r.KappaCell(); ok {
					k.rPID, k.rRec, k.rProto, k.rSite = append(k.rPID, p.id), append(k.rRec, r.ID), append(k.rProto, int32(e.ProtocolID)), append(k.rSite, int32(p.siteID))
					k.rEnrolled, k.rAuto, k.rRhythm = append(k.rEnrolled, enrolled), append(k.rAuto, string(a)), append(k.rRhythm, string(b))
				}
			}
			if waiting > 0 {
				unread += waiting
				k.wPID, k.wCase, k.wN = append(k.wPID, p.id), append(k.wCase, e.CaseID), append(k.wN, int32(waiting))
			}
		}
		if unread > 0 {
			k.uPID, k.uUnread = append(k.uPID, p.id), append(k.uUnread, int32(unread))
		}
	}
}

// queueWrites replaces the figure rows of the participants in ids (deleted
// first: the ledgers' triggers subtract the old rows and add the new).
func (k *keptRows) queueWrites(b *pgx.Batch, del string, args ...any) {
	for _, t := range []string{"figure_standings", "figure_episodes", "figure_recordings", "figure_people", "figure_waiting"} {
		if del != "" {
			b.Queue(`DELETE FROM `+t+` WHERE `+fmt.Sprintf(del, "participant_id"), args...)
		}
	}
	if len(k.sPID) > 0 {
		b.Queue(`INSERT INTO figure_standings (participant_id, protocol_id, site_id, enrolled_on, withdrawn_on, box, exit, sufficient_weeks)
			SELECT pid, proto, site, enrolled::date, CASE WHEN wnull THEN NULL ELSE withdrawn::date END, box, exit, weeks::smallint[]
			FROM unnest($1::bigint[], $2::int[], $3::int[], $4::text[], $5::text[], $6::bool[], $7::int[], $8::text[], $9::text[])
			  AS u(pid, proto, site, enrolled, withdrawn, wnull, box, exit, weeks)`,
			k.sPID, k.sProto, k.sSite, k.sEnrolledOn, k.sWithdrawn, k.sWithdrawnNull, k.sBox, k.sExit, k.sWeeks)
	}
	if len(k.ePID) > 0 {
		b.Queue(`INSERT INTO figure_episodes (participant_id, case_id, protocol_id, site_id, enrolled_on, sex, age_band, stage,
			  settled, uninterpretable, flag_day, event, closed, days)
			SELECT pid, cid, proto, site, enrolled::date, sex, band, stage, settled, uninterp, flag::date, ev, clos, days
			FROM unnest($1::bigint[], $2::bigint[], $3::int[], $4::int[], $5::text[], $6::text[], $7::text[], $8::int[],
			            $9::bool[], $10::bool[], $11::text[], $12::bool[], $13::bool[], $14::int[])
			  AS u(pid, cid, proto, site, enrolled, sex, band, stage, settled, uninterp, flag, ev, clos, days)`,
			k.ePID, k.eCase, k.eProto, k.eSite, k.eEnrolled, k.eSex, k.eBand, k.eStage, k.eSettled, k.eUninterp, k.eFlag, k.eEv, k.eClos, k.eDays)
	}
	if len(k.rPID) > 0 {
		b.Queue(`INSERT INTO figure_recordings (participant_id, recording_id, protocol_id, site_id, enrolled_on, auto, rhythm)
			SELECT pid, rid, proto, site, enrolled::date, auto, rhythm
			FROM unnest($1::bigint[], $2::bigint[], $3::int[], $4::int[], $5::text[], $6::text[], $7::text[])
			  AS u(pid, rid, proto, site, enrolled, auto, rhythm)`,
			k.rPID, k.rRec, k.rProto, k.rSite, k.rEnrolled, k.rAuto, k.rRhythm)
	}
	if len(k.uPID) > 0 {
		b.Queue(`INSERT INTO figure_people (participant_id, unread_recordings) SELECT * FROM unnest($1::bigint[], $2::int[])`, k.uPID, k.uUnread)
	}
	if len(k.wPID) > 0 {
		b.Queue(`INSERT INTO figure_waiting (participant_id, case_id, recordings) SELECT * FROM unnest($1::bigint[], $2::bigint[], $3::int[])`, k.wPID, k.wCase, k.wN)
	}
}

// refreshFigures computes the figures of the participants in ids inside tx.
// It takes each participant's advisory lock first (in id order, so two
// transactions never wait for each other in a circle), so the rows it reads
// include every change committed before, and a transaction that changes the
// same participant after it computes them again once this one committed.
func refreshFigures(ctx context.Context, tx pgx.Tx, ids []int64) error {
	if len(ids) == 0 {
		return nil
	}
	b := &pgx.Batch{}
	b.Queue(`SELECT count(pg_advisory_xact_lock($1, (id % 2147483647)::int))
		FROM (SELECT DISTINCT id FROM unnest($2::bigint[]) AS u(id) ORDER BY id OFFSET 0) s`, figuresLockClass, ids)
	b.Queue(`DELETE FROM figures_dirty WHERE participant_id = ANY($1)`, ids)
	keptQueries(b, "%s = ANY($1)", ids)
	br := tx.SendBatch(ctx, b)
	var locked int64
	if err := br.QueryRow().Scan(&locked); err != nil {
		br.Close()
		return err
	}
	if _, err := br.Exec(); err != nil {
		br.Close()
		return err
	}
	return keep(ctx, tx, br, "%s = ANY($1)", ids)
}

// keep reads the participants' rows from br (keptQueries, queued last),
// closes it, computes their figures and replaces their stored ones (those
// matching del first, when del is not "").
func keep(ctx context.Context, tx pgx.Tx, br pgx.BatchResults, del string, args ...any) error {
	people, loc, err := readKept(br)
	if cerr := br.Close(); err == nil {
		err = cerr
	}
	if err != nil {
		return err
	}
	var k keptRows
	k.compute(people, loc)
	w := &pgx.Batch{}
	k.queueWrites(w, del, args...)
	return tx.SendBatch(ctx, w).Close()
}

// refreshMarked computes the figures of the participants this transaction
// marked: the last step of every transaction the store opens. A change that
// touches very many participants at once (the study's time zone moves every
// flag day) leaves them to the background pass rather than hold its
// transaction for minutes; pages say how many wait meanwhile.
func refreshMarked(ctx context.Context, tx pgx.Tx) error {
	rows, err := tx.Query(ctx, `SELECT figures_take_marked()`)
	if err != nil {
		return err
	}
	ids, err := pgx.CollectRows(rows, pgx.RowTo[int64])
	if err != nil || len(ids) == 0 {
		return err
	}
	ids = dedupe(ids)
	if len(ids) > inlineRefreshMax {
		_, err := tx.Exec(ctx, `INSERT INTO figures_dirty (participant_id) SELECT unnest($1::bigint[])`, ids)
		return err
	}
	return refreshFigures(ctx, tx, ids)
}

// inlineRefreshMax is how many participants a transaction computes the
// figures of itself; beyond it the background pass does.
const inlineRefreshMax = 2000

func dedupe(ids []int64) []int64 {
	seen := make(map[int64]bool, len(ids))
	out := ids[:0]
	for _, id := range ids {
		if !seen[id] {
			seen[id] = true
			out = append(out, id)
		}
	}
	return out
}

// DrainFigures computes the figures of up to max participants marked by
// transactions that committed without computing them (bulk loads by SQL)
// and returns how many it computed.
func (s *Store) DrainFigures(ctx context.Context, max int) (int, error) {
	var n int
	err := pgx.BeginFunc(ctx, s.pool, func(tx pgx.Tx) error {
		rows, err := tx.Query(ctx, `SELECT DISTINCT participant_id FROM figures_dirty ORDER BY 1 LIMIT $1`, max)
		if err != nil {
			return err
		}
		ids, err := pgx.CollectRows(rows, pgx.RowTo[int64])
		if err != nil {
			return err
		}
		n = len(ids)
		return refreshFigures(ctx, tx, ids)
	})
	return n, mapErr("keep figures", err)
}

// rebuildBatch is how many participant ids one step of RebuildFigures covers.
const rebuildBatch = 20000

// RebuildFigures computes every participant's figures from scratch and
// empties the ledgers they feed, in one transaction: pages read the old
// figures until it commits. The ledgers kept by triggers on the study's own
// tables (enrolment, cases, activity) are not touched.
func (s *Store) RebuildFigures(ctx context.Context) error {
	err := pgx.BeginFunc(ctx, s.pool, func(tx pgx.Tx) error {
		// DELETE, not TRUNCATE: the application's database role may not
		// truncate (db/roles.go). The per-participant rows go first; their
		// ledger triggers' rows go with the ledgers after them.
		for _, t := range []string{"figure_standings", "figure_episodes", "figure_recordings", "figure_people", "figure_waiting",
			"figure_box_counts", "figure_week_counts", "figure_stage_counts", "figure_time_counts", "figure_kappa_counts", "figure_unread_counts"} {
			if _, err := tx.Exec(ctx, `DELETE FROM `+t); err != nil {
				return err
			}
		}
		if _, err := tx.Exec(ctx, `DELETE FROM figures_dirty`); err != nil {
			return err
		}
		var lo, hi int64
		if err := tx.QueryRow(ctx, `SELECT coalesce(min(id), 0), coalesce(max(id), -1) FROM participants`).Scan(&lo, &hi); err != nil {
			return err
		}
		for from := lo; from <= hi; from += rebuildBatch {
			b := &pgx.Batch{}
			keptQueries(b, "%s BETWEEN $1 AND $2", from, from+rebuildBatch-1)
			if err := keep(ctx, tx, tx.SendBatch(ctx, b), ""); err != nil {
				return err
			}
		}
		_, err := tx.Exec(ctx, `UPDATE figures_state SET built_at = now()`)
		return err
	})
	return mapErr("rebuild figures", err)
}

// EnsureFigures builds the figures when they were never built (a database
// that held a study before they were kept): run at start-up.
func (s *Store) EnsureFigures(ctx context.Context) error {
	var built bool
	if err := s.pool.QueryRow(ctx, `SELECT coalesce((SELECT built_at IS NOT NULL FROM figures_state), true)`).Scan(&built); err != nil {
		return mapErr("figures state", err)
	}
	if built {
		return nil
	}
	return s.RebuildFigures(ctx)
}
