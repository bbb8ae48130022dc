package db

// The reference computations of the kept figures, for tests only: each
// reads every row it needs from the study's own tables and counts it with
// the same rules (cohort/cascade) as the kept figures, the way the pages
// did before the figures were kept (figures.go, figures_keep.go).

import (
	"context"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/cascade"
	"cohortdesk/cohort/followup"
	"cohortdesk/cohort/overread"

	"github.com/jackc/pgx/v5"
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
