package db

// One code path per number: the screening cascade (progress page, weekly
// report) and the agreement statistics (confirmations) are both counted by
// cohort/cascade. Each participant's standing and each episode's figures are
// computed by its rules as the rows change (figures_keep.go) and kept summed
// in ledgers (migration 0040); the functions here add up the ledger rows the
// filter chooses, one read per page, so their cost depends on the study's
// sites, days and categories, not on its participants. Nothing else in the
// application counts confirmed cases, over-reads or flagged episodes.

import (
	"context"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/cascade"
	"cohortdesk/cohort/overread"

	"github.com/jackc/pgx/v5"
)

// filterArgs are the filter's site and enrolment period as query arguments
// ($1 site id or 0, $2 and $3 the first day and the day after, or NULL).
func filterArgs(f cascade.Filter) []any {
	var from, to *string
	if !f.From.IsZero() {
		d := cohort.DateOf(f.From).String()
		from = &d
	}
	if !f.To.IsZero() {
		d := cohort.DateOf(f.To).String()
		to = &d
	}
	return []any{f.SiteID, from, to}
}

// chosenBy is the filter as a condition on a table with site_id and
// enrolled_on columns (alias x).
const chosenBy = `($1 = 0 OR x.site_id = $1) AND ($2::date IS NULL OR x.enrolled_on >= $2::date) AND ($3::date IS NULL OR x.enrolled_on < $3::date)`

// figureSums reads, in one round trip, the sums behind the cascade and the
// agreement statistics for the filter: every version's, so the chosen one
// is picked by cascade.ChooseProtocol here.
func (s *Store) figureSums(ctx context.Context, f cascade.Filter) (cascade.Counts, cascade.Sums, error) {
	var counts cascade.Counts
	var sums cascade.Sums
	args := filterArgs(f)
	period := !f.From.IsZero() || !f.To.IsZero()
	b := &pgx.Batch{}
	b.Queue(`SELECT id, name, version, active FROM protocols ORDER BY name, version, id`)
	b.Queue(`SELECT coalesce((SELECT time_zone FROM study WHERE id = 1), 'UTC')`)
	b.Queue(`SELECT st.code, x.withdrawn_on IS NOT NULL, sum(x.n) FROM enrolment_counts x JOIN sites st ON st.id = x.site_id
		WHERE `+chosenBy+` GROUP BY 1, 2 HAVING sum(x.n) <> 0`, args...)
	b.Queue(`SELECT x.protocol_id, x.withdrawn, x.box, x.exit, sum(x.n) FROM figure_box_counts x
		WHERE `+chosenBy+` GROUP BY 1, 2, 3, 4 HAVING sum(x.n) <> 0`, args...)
	// Episode sums have no enrolment day (it would multiply their rows by
	// the days of the study); a period is added up from the episodes' own
	// rows, which cost what the period holds.
	stages := `SELECT x.protocol_id, st.code, x.sex, x.age_band, x.stage, x.settled, x.uninterpretable, sum(x.n)
		FROM figure_stage_counts x JOIN sites st ON st.id = x.site_id WHERE ($1 = 0 OR x.site_id = $1) AND $2::date IS NULL AND $3::date IS NULL
		GROUP BY 1, 2, 3, 4, 5, 6, 7 HAVING sum(x.n) <> 0`
	times := `SELECT x.protocol_id, st.code, x.sex, x.age_band, x.event, x.closed, x.days, x.flag_day, sum(x.n)
		FROM figure_time_counts x JOIN sites st ON st.id = x.site_id WHERE ($1 = 0 OR x.site_id = $1) AND $2::date IS NULL AND $3::date IS NULL
		GROUP BY 1, 2, 3, 4, 5, 6, 7, 8 HAVING sum(x.n) <> 0`
	kappa := `SELECT x.protocol_id, x.auto, x.rhythm, sum(x.n) FROM figure_kappa_counts x
		WHERE ($1 = 0 OR x.site_id = $1) AND $2::date IS NULL AND $3::date IS NULL GROUP BY 1, 2, 3 HAVING sum(x.n) <> 0`
	if period {
		stages = `SELECT x.protocol_id, st.code, x.sex, x.age_band, x.stage, x.settled, x.uninterpretable, count(*)
			FROM figure_episodes x JOIN sites st ON st.id = x.site_id WHERE ` + chosenBy + ` GROUP BY 1, 2, 3, 4, 5, 6, 7`
		times = `SELECT x.protocol_id, st.code, x.sex, x.age_band, x.event, x.closed, x.days,
			       CASE WHEN x.event OR x.closed THEN NULL ELSE x.flag_day END, count(*)
			FROM figure_episodes x JOIN sites st ON st.id = x.site_id WHERE ` + chosenBy + ` GROUP BY 1, 2, 3, 4, 5, 6, 7, 8`
		kappa = `SELECT x.protocol_id, x.auto, x.rhythm, count(*) FROM figure_recordings x WHERE ` + chosenBy + ` GROUP BY 1, 2, 3`
	}
	b.Queue(stages, args...)
	b.Queue(times, args...)
	b.Queue(kappa, args...)

	var boxRows []boxRow
	var enrolled, withdrawn int
	err := s.readBatch(ctx, b, func(br pgx.BatchResults) error {
		rows, err := br.Query()
		if err != nil {
			return err
		}
		sums.Versions, err = pgx.CollectRows(rows, func(r pgx.CollectableRow) (cascade.ProtocolRef, error) {
			var p cascade.ProtocolRef
			err := r.Scan(&p.ID, &p.Name, &p.Version, &p.Active)
			return p, err
		})
		if err != nil {
			return err
		}
		var zone string
		if err := br.QueryRow().Scan(&zone); err != nil {
			return err
		}
		loc, err := time.LoadLocation(zone)
		if err != nil {
			loc = time.UTC
		}
		asOf := f.AsOf
		if asOf.IsZero() {
			asOf = s.now()
		}
		sums.AsOf = cohort.DateOf(asOf.In(loc))
		if rows, err = br.Query(); err != nil {
			return err
		}
		seen := map[string]bool{}
		for rows.Next() {
			var code string
			var w bool
			var n int
			if err := rows.Scan(&code, &w, &n); err != nil {
				rows.Close()
				return err
			}
			enrolled += n
			if w {
				withdrawn += n
			}
			if !seen[code] {
				seen[code] = true
				sums.Sites = append(sums.Sites, code)
			}
		}
		if err := rows.Err(); err != nil {
			return err
		}
		if rows, err = br.Query(); err != nil {
			return err
		}
		boxRows, err = pgx.CollectRows(rows, func(r pgx.CollectableRow) (boxRow, error) {
			var x boxRow
			var exit string
			err := r.Scan(&x.protocol, &x.withdrawn, &x.st.Box, &exit, &x.n)
			x.st.Exit = cascade.ExitReason(exit)
			return x, err
		})
		if err != nil {
			return err
		}
		if rows, err = br.Query(); err != nil {
			return err
		}
		sums.Stages, err = pgx.CollectRows(rows, func(r pgx.CollectableRow) (cascade.StageCount, error) {
			var c cascade.StageCount
			var sex string
			var stage int16
			err := r.Scan(&c.Key.ProtocolID, &c.Key.Site, &sex, &c.Key.AgeBand, &stage, &c.Settled, &c.Uninterpretable, &c.N)
			c.Key.Sex, c.Stage = cohort.Sex(sex), cascade.Stage(stage)
			return c, err
		})
		if err != nil {
			return err
		}
		if rows, err = br.Query(); err != nil {
			return err
		}
		sums.Times, err = pgx.CollectRows(rows, func(r pgx.CollectableRow) (cascade.TimeCount, error) {
			var c cascade.TimeCount
			var sex string
			var flag *time.Time
			err := r.Scan(&c.Key.ProtocolID, &c.Key.Site, &sex, &c.Key.AgeBand, &c.Event, &c.Closed, &c.Days, &flag, &c.N)
			c.Key.Sex = cohort.Sex(sex)
			if flag != nil {
				c.FlagDay = cohort.DateOf(*flag)
			}
			return c, err
		})
		if err != nil {
			return err
		}
		if rows, err = br.Query(); err != nil {
			return err
		}
		sums.Kappa, err = pgx.CollectRows(rows, func(r pgx.CollectableRow) (cascade.KappaCount, error) {
			var c cascade.KappaCount
			var a, b string
			err := r.Scan(&c.ProtocolID, &a, &b, &c.N)
			c.Auto, c.Rhythm = overread.Category(a), overread.Category(b)
			return c, err
		})
		return err
	})
	if err != nil {
		return counts, sums, mapErr("figures", err)
	}
	if sums.Protocol, err = cascade.ChooseProtocol(sums.Versions, f.ProtocolID); err != nil {
		return counts, sums, err
	}
	// Participants with no row under the version stand where a participant
	// without any result or case stands.
	kept, keptWithdrawn := 0, 0
	for _, x := range boxRows {
		if x.protocol != sums.Protocol.ID {
			continue
		}
		counts.Add(x.st, x.n)
		kept += x.n
		if x.withdrawn {
			keptWithdrawn += x.n
		}
	}
	counts.Add(cascade.Stand(cascade.Person{}, nil, sums.Protocol.ID), (enrolled-withdrawn)-(kept-keptWithdrawn))
	counts.Add(cascade.Stand(cascade.Person{Withdrawn: true}, nil, sums.Protocol.ID), withdrawn-keptWithdrawn)
	for _, c := range sums.Stages {
		if c.Key.ProtocolID == sums.Protocol.ID && c.Stage >= cascade.StageFlagged && c.Stage <= cascade.StageReferred {
			counts.Cases[c.Stage] += c.N
		}
	}
	return counts, sums, nil
}

// boxRow is a sum of standings of one version.
type boxRow struct {
	protocol  int
	withdrawn bool
	st        cascade.Standing
	n         int
}

// Cascade counts the screening cascade for the filter; see cascade.Cascade
// for how each box is defined. Boxes carry counts; a box's members are read
// page by page (CascadeMembersAfter).
func (s *Store) Cascade(ctx context.Context, f cascade.Filter) (cascade.Cascade, error) {
	counts, sums, err := s.figureSums(ctx, f)
	if err != nil {
		return cascade.Cascade{}, err
	}
	return counts.Cascade(f, sums.Protocol, sums.Versions), nil
}

// Agreement computes the agreement statistics for the filter's protocol
// version (subgroups) and for every version.
func (s *Store) Agreement(ctx context.Context, f cascade.Filter) (cascade.Agreement, error) {
	_, sums, err := s.figureSums(ctx, f)
	if err != nil {
		return cascade.Agreement{}, err
	}
	return sums.Agreement()
}

// Figures computes the cascade and the agreement statistics from one read,
// so a report that shows both shows them as the database stood at one
// moment; each is exactly what Cascade and Agreement return for f.
func (s *Store) Figures(ctx context.Context, f cascade.Filter) (cascade.Cascade, cascade.Agreement, error) {
	counts, sums, err := s.figureSums(ctx, f)
	if err != nil {
		return cascade.Cascade{}, cascade.Agreement{}, err
	}
	a, err := sums.Agreement()
	if err != nil {
		return cascade.Cascade{}, cascade.Agreement{}, err
	}
	return counts.Cascade(f, sums.Protocol, sums.Versions), a, nil
}

// FiguresPending says how current the kept figures are: how many
// participants' figures wait to be computed after a change made outside the
// store's transactions (a bulk load), and since when. Zero most of the time.
type FiguresPending struct {
	Participants int // at most PendingCap
	Since        time.Time
	Building     bool // the figures were never built yet
}

// PendingCap bounds the count of waiting participants: a page says "more
// than" beyond it.
const PendingCap = 10000

// Pending reads how current the kept figures are.
func (s *Store) Pending(ctx context.Context) (FiguresPending, error) {
	var p FiguresPending
	var since *time.Time
	err := s.reader(ctx).QueryRow(ctx, `
		SELECT (SELECT count(DISTINCT participant_id) FROM (SELECT participant_id FROM figures_dirty LIMIT $1) d),
		       (SELECT min(marked_at) FROM figures_dirty),
		       coalesce((SELECT built_at IS NULL FROM figures_state), false)`, PendingCap).Scan(&p.Participants, &since, &p.Building)
	p.Since = timeOf(since)
	return p, mapErr("figures pending", err)
}
