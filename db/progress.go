package db

import (
	"context"
	"fmt"
	"slices"
	"strconv"
	"strings"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/cascade"
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
	// Enrolment counts are kept by day (enrolment_counts); a row stands for
	// n participants of one site enrolled on one day and withdrawn on one day.
	rows, err := s.reader(ctx).Query(ctx, `
		SELECT site_id, enrolled_on, withdrawn_on IS NOT NULL AND withdrawn_on <= $1::date, sum(n)
		FROM enrolment_counts WHERE enrolled_on <= $1::date GROUP BY 1, 2, 3 HAVING sum(n) <> 0 ORDER BY 2`, asOf.String())
	if err != nil {
		return enrolment.History{}, mapErr("enrolment", err)
	}
	people, err := pgx.CollectRows(rows, func(r pgx.CollectableRow) (enrolment.Enrolled, error) {
		var e enrolment.Enrolled
		var on time.Time
		err := r.Scan(&e.Site, &on, &e.Withdrawn, &e.N)
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
// zone) and before any withdrawal, within the study's weeks of follow-up
// (weekDue). Both counts come from sums kept by enrolment day and withdrawal
// day (enrolment_counts; figure_week_counts for the weeks with a verdict under
// the active version), so the read costs what the study's days hold, not its
// participants.
func (s *Store) DataSufficiency(ctx context.Context) ([]SufficiencyWeek, error) {
	st, err := s.StudySettings(ctx)
	if err != nil {
		return nil, err
	}
	today := cohort.DateOf(s.now().In(st.Location()))
	type group struct {
		enrolled  cohort.Date
		withdrawn cohort.Date // zero: not withdrawn
		week, n   int
	}
	scan := func(rows pgx.Rows, withWeek bool) ([]group, error) {
		defer rows.Close()
		var out []group
		for rows.Next() {
			var g group
			var on time.Time
			var wd *time.Time
			var err error
			if withWeek {
				var w int16
				err = rows.Scan(&on, &wd, &w, &g.n)
				g.week = int(w)
			} else {
				err = rows.Scan(&on, &wd, &g.n)
			}
			if err != nil {
				return nil, err
			}
			g.enrolled = cohort.DateOf(on)
			if wd != nil {
				g.withdrawn = cohort.DateOf(*wd)
			}
			out = append(out, g)
		}
		return out, rows.Err()
	}
	var people, verdicts []group
	b := &pgx.Batch{}
	b.Queue(`SELECT enrolled_on, withdrawn_on, sum(n) FROM enrolment_counts WHERE enrolled_on <= $1::date GROUP BY 1, 2 HAVING sum(n) <> 0`, today.String())
	b.Queue(`SELECT enrolled_on, withdrawn_on, week, sum(n) FROM figure_week_counts
		WHERE protocol_id = (SELECT id FROM protocols WHERE active) AND enrolled_on <= $1::date
		GROUP BY 1, 2, 3 HAVING sum(n) <> 0`, today.String())
	err = s.readBatch(ctx, b, func(br pgx.BatchResults) error {
		rows, err := br.Query()
		if err != nil {
			return err
		}
		if people, err = scan(rows, false); err != nil {
			return err
		}
		if rows, err = br.Query(); err != nil {
			return err
		}
		verdicts, err = scan(rows, true)
		return err
	})
	if err != nil {
		return nil, mapErr("data sufficiency", err)
	}
	due, enough := map[cohort.Date]int{}, map[cohort.Date]int{}
	for _, g := range people {
		for w := 0; ; w++ {
			if !weekDue(g.enrolled, g.withdrawn, w, today, st.FollowUpWeeks) {
				break
			}
			due[weekEnd(g.enrolled, w).Monday()] += g.n
		}
	}
	for _, g := range verdicts {
		if weekDue(g.enrolled, g.withdrawn, g.week, today, st.FollowUpWeeks) {
			enough[weekEnd(g.enrolled, g.week).Monday()] += g.n
		}
	}
	out := make([]SufficiencyWeek, 0, len(due))
	for monday, n := range due {
		out = append(out, SufficiencyWeek{Week: monday, Active: n, Sufficient: enough[monday]})
	}
	slices.SortFunc(out, func(a, b SufficiencyWeek) int { return a.Week.DaysSince(b.Week) })
	return out, nil
}

// weekEnd is the last day of study week w of a participant enrolled on the
// day enrolled.
func weekEnd(enrolled cohort.Date, w int) cohort.Date { return enrolled.AddDays(7*(w+1) - 1) }

// weekDue reports whether study week w (from 0) of a participant enrolled on
// enrolled and withdrawn on withdrawn (zero: not withdrawn) is due: it ended
// before today and before the withdrawal, within the weeks of follow-up
// (weeks; 0 is open-ended).
func weekDue(enrolled, withdrawn cohort.Date, w int, today cohort.Date, weeks int) bool {
	if w < 0 || (weeks > 0 && w >= weeks) {
		return false
	}
	until := today
	if !withdrawn.IsZero() && withdrawn.Before(until) {
		until = withdrawn
	}
	return weekEnd(enrolled, w).Before(until)
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
	key        string     // its place in the order, for the next page's cursor
}

// Location is the participant's time zone (UTC when unreadable).
func (sp SilentParticipant) Location() *time.Location {
	return Participant{TimeZone: sp.TimeZone}.Location()
}

// SilentPage is one page of the participants gone silent, longest silence
// first, with how many there are in all.
type SilentPage struct {
	Rows  []SilentParticipant
	Total int
	// AtLeast: the count stopped at SilentCountCap; there are more.
	AtLeast bool
	Next    string // the After of the next page; "" after the last
}

// SilentParticipants lists active participants still in follow-up with no
// reading in the last days days, longest silence first (those who never sent
// anything first of all), limit at a time after the cursor after ("" for the
// first page). The latest reading of each participant is kept by a trigger
// (participant_activity); the read walks the enrolment days still in
// follow-up, taking each day's silent participants in order from an index,
// so a page costs what it shows.
func (s *Store) SilentParticipants(ctx context.Context, days int, after string, limit int) (SilentPage, error) {
	now := s.now()
	cutoff := now.Add(-time.Duration(days) * 24 * time.Hour).UnixMilli()
	afterMS, afterSID := int64(-1), ""
	if after != "" {
		ms, sid, ok := strings.Cut(after, ":")
		v, err := strconv.ParseInt(ms, 10, 64)
		if !ok || err != nil {
			return SilentPage{}, &cohort.ValidationError{Fields: map[string]string{"silent_after": "a position from the previous page"}}
		}
		afterMS, afterSID = v, sid
	}
	// The enrolment days whose participants are still in follow-up (all days
	// for an open-ended study), and the silent ones among them.
	const silent = `
		WITH span AS (
		  SELECT CASE WHEN coalesce((SELECT follow_up_weeks FROM study WHERE id = 1), 0) = 0 THEN (SELECT min(enrolled_on) FROM participant_activity)
		              ELSE $2::date - 7 * (SELECT follow_up_weeks FROM study WHERE id = 1) + 1 END AS first)
		SELECT a.participant_id, a.study_id, a.last_ms, a.enrolled_on
		FROM span CROSS JOIN LATERAL generate_series(span.first, $2::date, interval '1 day') d(day)
		CROSS JOIN LATERAL (
		  SELECT a.participant_id, a.study_id, a.last_ms, a.enrolled_on FROM participant_activity a
		  WHERE NOT a.withdrawn AND a.enrolled_on = d.day::date AND coalesce(a.last_ms, 0) < $1
		    AND (a.last_ms IS NOT NULL OR extract(epoch FROM d.day::date::timestamptz) * 1000 < $1)
		    AND (coalesce(a.last_ms, 0), a.study_id) > ($3, $4)
		  ORDER BY coalesce(a.last_ms, 0), a.study_id %s) a`
	var page SilentPage
	b := &pgx.Batch{}
	b.Queue(fmt.Sprintf(`SELECT count(*) FROM (SELECT 1 FROM (`+silent+`) y LIMIT %d) x`, "", SilentCountCap+1), cutoff, now.UTC().Format("2006-01-02"), int64(-1), "")
	// The page's rows are chosen first, then joined to their sites.
	b.Queue(fmt.Sprintf(`SELECT x.participant_id, x.study_id, st.code, x.last_ms, x.enrolled_on, p.time_zone
		FROM (SELECT * FROM (`+silent+`) y ORDER BY coalesce(y.last_ms, 0), y.study_id LIMIT $5) x
		JOIN participants p ON p.id = x.participant_id JOIN sites st ON st.id = p.site_id
		ORDER BY coalesce(x.last_ms, 0), x.study_id`, "LIMIT $5"), cutoff, now.UTC().Format("2006-01-02"), afterMS, afterSID, limit+1)
	err := s.readBatch(ctx, b, func(br pgx.BatchResults) error {
		if err := br.QueryRow().Scan(&page.Total); err != nil {
			return err
		}
		rows, err := br.Query()
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
			sp.key = "0:" + sp.StudyID
			if ms != nil {
				sp.key = strconv.FormatInt(*ms, 10) + ":" + sp.StudyID
			}
			page.Rows = append(page.Rows, sp)
		}
		return rows.Err()
	})
	if err != nil {
		return page, mapErr("silent participants", err)
	}
	if len(page.Rows) > limit {
		page.Rows = page.Rows[:limit]
		page.Next = page.Rows[limit-1].key
	}
	if page.Total > SilentCountCap {
		page.Total, page.AtLeast = SilentCountCap, true
	}
	return page, nil
}

// SilentCountCap bounds the count of silent participants the progress page
// shows: beyond it the page says "more than", and the list pages on.
const SilentCountCap = 1000

// CascadeMember is a participant as a box of the cascade lists them: study
// ID, site and their cases, nothing identifying.
type CascadeMember struct {
	ID         int64
	StudyID    string
	SiteCode   string
	EnrolledOn cohort.Date
	Withdrawn  bool
	Cases      []MemberCase // under the cascade's protocol version, oldest flag first
	// Standing is where they stand in the cascade of that version.
	Standing cascade.Standing
	kept     bool // Standing was read (not implied by having no row)
}

// MemberCase is one case of a CascadeMember.
type MemberCase struct {
	ID        int64
	State     followup.State
	FlaggedAt time.Time
	FirstWeek int
	LastWeek  int
}

// BoxPage is one page of the participants of a box of the cascade, or of
// those who left it for one reason, in participant order.
type BoxPage struct {
	Members []CascadeMember
	Next    int64 // the After of the next page; 0 after the last
}

// CascadeMembersAfter lists, page by page, the participants of box number
// box of the cascade for f (its ProtocolID resolved, as Cascade returns it
// in Cascade.Filter), or with exit those who stopped in that box for that
// reason: up to limit participants with ids above after. Who stands where
// comes from the kept standings (cascade.Stand); a page costs what it shows,
// except the participants without any result or case under the version
// (box 0's exits), who are found by what they lack.
func (s *Store) CascadeMembersAfter(ctx context.Context, f cascade.Filter, box int, exit cascade.ExitReason, after int64, limit int) (BoxPage, error) {
	args := append(filterArgs(f), f.ProtocolID, after, limit+1)
	standing := func(b int, extra string) string {
		return fmt.Sprintf(`(SELECT x.participant_id AS id FROM figure_standings x WHERE x.protocol_id = $4 AND x.box = %d%s AND %s
			AND x.participant_id > $5 ORDER BY x.participant_id LIMIT $6)`, b, extra, chosenBy)
	}
	var parts []string
	bare := cascade.Stand(cascade.Person{}, nil, f.ProtocolID)
	bareW := cascade.Stand(cascade.Person{Withdrawn: true}, nil, f.ProtocolID)
	switch {
	case box == 0 && exit == "":
		parts = append(parts, `(SELECT x.id FROM participants x WHERE `+chosenBy+` AND x.id > $5 ORDER BY x.id LIMIT $6)`)
	case exit == "":
		for b := box; b < cascade.BoxCount(); b++ {
			parts = append(parts, standing(b, ""))
		}
	default:
		args = append(args, string(exit))
		parts = append(parts, standing(box, " AND x.exit = $7"))
		for _, bare := range []struct {
			st        cascade.Standing
			withdrawn bool
		}{{bare, false}, {bareW, true}} {
			if bare.st.Box == box && bare.st.Exit == exit {
				parts = append(parts, fmt.Sprintf(`(SELECT x.id FROM participants x WHERE %s AND (x.withdrawn_on IS NOT NULL) = %t AND x.id > $5
					AND NOT EXISTS (SELECT 1 FROM figure_standings s WHERE s.participant_id = x.id AND s.protocol_id = $4)
					ORDER BY x.id LIMIT $6)`, chosenBy, bare.withdrawn))
			}
		}
	}
	var page BoxPage
	rows, err := s.reader(ctx).Query(ctx, `SELECT id FROM (`+strings.Join(parts, " UNION ALL ")+`) u WHERE $4::int IS NOT NULL ORDER BY id LIMIT $6`, args...)
	if err != nil {
		return page, mapErr("cascade box", err)
	}
	ids, err := pgx.CollectRows(rows, pgx.RowTo[int64])
	if err != nil {
		return page, mapErr("cascade box", err)
	}
	if len(ids) > limit {
		ids = ids[:limit]
		page.Next = ids[limit-1]
	}
	page.Members, err = s.CascadeMembers(ctx, f.ProtocolID, ids)
	return page, err
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
	err := s.readTx(ctx, func(tx pgx.Tx) error {
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
		rows, err = tx.Query(ctx, `SELECT participant_id, box, exit FROM figure_standings WHERE participant_id = ANY($1) AND protocol_id = $2`, ids, protocolID)
		if err != nil {
			return err
		}
		for rows.Next() {
			var pid int64
			var st cascade.Standing
			var exit string
			if err := rows.Scan(&pid, &st.Box, &exit); err != nil {
				rows.Close()
				return err
			}
			st.Exit = cascade.ExitReason(exit)
			if m := byID[pid]; m != nil {
				m.Standing, m.kept = st, true
			}
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
			if !m.kept {
				m.Standing = cascade.Stand(cascade.Person{Withdrawn: m.Withdrawn}, nil, protocolID)
			}
			out = append(out, *m)
		}
	}
	return out, nil
}
