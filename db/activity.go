package db

import (
	"context"
	"strings"
	"time"

	"cohortdesk/cohort"

	"github.com/jackc/pgx/v5"
)

// Activity is what the study team and the participants did in a span of
// days, across the whole study (or one site): the weekly report's "the
// week". Each figure counts its own unit.
type Activity struct {
	Enrolled      int // participants enrolled, by enrolment day
	Withdrawn     int // participants withdrawn, by withdrawal day
	Flagged       int // follow-up cases opened (flagged episodes), by flag time
	Attempts      int // contact attempts, by attempt time
	Reached       int // of those, attempts that reached the participant
	RecordersSent int // recorders shipped (cases), by shipment time
	Recordings    int // ECG recordings received, by receipt time
	OverReads     int // readings entered, by the day they were read
	SignedOff     int // referral summaries signed off (cases referred), by sign-off time
	Ended         int // cases ended (referred or closed), by closing time
}

// Activity counts what happened from the day from to the day to, both
// included, days counted in loc (the study's zone), and everything up to
// the end of the day to (so far), for the participants of siteID (0: all).
func (s *Store) Activity(ctx context.Context, siteID int, from, to cohort.Date, loc *time.Location) (week, sofar Activity, err error) {
	start, end := from.In(loc), to.AddDays(1).In(loc)
	first, last := from.String(), to.String()
	err = pgx.BeginTxFunc(ctx, s.pool, pgx.TxOptions{AccessMode: pgx.ReadOnly, IsoLevel: pgx.RepeatableRead}, func(tx pgx.Tx) error {
		// Each query gives the count in the span and the count so far. $1
		// is the site; $2 and $3 the span's first and last day for a
		// figure counted by day, its first instant and the instant after
		// it for one counted by time.
		for _, q := range []struct {
			sql       string
			in, total *int
		}{
			{`SELECT count(*) FILTER (WHERE p.enrolled_on BETWEEN $2::date AND $3::date), count(*) FILTER (WHERE p.enrolled_on <= $3::date)
				FROM participants p WHERE ($1 = 0 OR p.site_id = $1)`, &week.Enrolled, &sofar.Enrolled},
			{`SELECT count(*) FILTER (WHERE p.withdrawn_on BETWEEN $2::date AND $3::date), count(*) FILTER (WHERE p.withdrawn_on <= $3::date)
				FROM participants p WHERE ($1 = 0 OR p.site_id = $1)`, &week.Withdrawn, &sofar.Withdrawn},
			{`SELECT count(*) FILTER (WHERE c.flagged_at >= $2 AND c.flagged_at < $3), count(*) FILTER (WHERE c.flagged_at < $3)
				FROM cases c JOIN participants p ON p.id = c.participant_id WHERE ($1 = 0 OR p.site_id = $1)`, &week.Flagged, &sofar.Flagged},
			{`SELECT count(*) FILTER (WHERE a.at >= $2 AND a.at < $3), count(*) FILTER (WHERE a.at < $3)
				FROM contact_attempts a JOIN participants p ON p.id = a.participant_id WHERE ($1 = 0 OR p.site_id = $1)`, &week.Attempts, &sofar.Attempts},
			{`SELECT count(*) FILTER (WHERE a.at >= $2 AND a.at < $3), count(*) FILTER (WHERE a.at < $3)
				FROM contact_attempts a JOIN participants p ON p.id = a.participant_id WHERE ($1 = 0 OR p.site_id = $1) AND a.outcome = 'reached'`, &week.Reached, &sofar.Reached},
			{`SELECT count(*) FILTER (WHERE c.recorder_sent_at >= $2 AND c.recorder_sent_at < $3), count(*) FILTER (WHERE c.recorder_sent_at < $3)
				FROM cases c JOIN participants p ON p.id = c.participant_id WHERE ($1 = 0 OR p.site_id = $1)`, &week.RecordersSent, &sofar.RecordersSent},
			{`SELECT count(*) FILTER (WHERE r.received_at >= $2 AND r.received_at < $3), count(*) FILTER (WHERE r.received_at < $3)
				FROM recordings r JOIN participants p ON p.id = r.participant_id WHERE ($1 = 0 OR p.site_id = $1)`, &week.Recordings, &sofar.Recordings},
			{`SELECT count(*) FILTER (WHERE o.read_on BETWEEN $2::date AND $3::date), count(*) FILTER (WHERE o.read_on <= $3::date)
				FROM over_reads o JOIN participants p ON p.id = o.participant_id WHERE ($1 = 0 OR p.site_id = $1)`, &week.OverReads, &sofar.OverReads},
			{`SELECT count(*) FILTER (WHERE f.signed_off_at >= $2 AND f.signed_off_at < $3), count(*) FILTER (WHERE f.signed_off_at < $3)
				FROM referrals f JOIN participants p ON p.id = f.participant_id WHERE ($1 = 0 OR p.site_id = $1)`, &week.SignedOff, &sofar.SignedOff},
			{`SELECT count(*) FILTER (WHERE c.closed_at >= $2 AND c.closed_at < $3), count(*) FILTER (WHERE c.closed_at < $3)
				FROM cases c JOIN participants p ON p.id = c.participant_id WHERE ($1 = 0 OR p.site_id = $1)`, &week.Ended, &sofar.Ended},
		} {
			a, b := any(start), any(end)
			if strings.Contains(q.sql, "::date") {
				a, b = first, last
			}
			if err := tx.QueryRow(ctx, q.sql, siteID, a, b).Scan(q.in, q.total); err != nil {
				return err
			}
		}
		return nil
	})
	return week, sofar, mapErr("activity", err)
}
