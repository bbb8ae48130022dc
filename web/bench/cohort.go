package bench

import (
	"context"
	"encoding/json"
	"fmt"
	"math/rand/v2"
	"strings"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/credential"
	"cohortdesk/cohort/screen"
	"cohortdesk/cohort/wear"
	"cohortdesk/db"

	"github.com/jackc/pgx/v5"
)

// Password is the password of every synthetic staff account. The accounts
// are hashed with cheap parameters: the bench measures pages, not password
// hashing, and the database is a throw-away one.
const Password = "synthetic bench password"

// synthParticipant is a participant with wear data, as the generator needs it.
type synthParticipant struct {
	ID       int64
	StudyID  string
	Enrolled cohort.Date
}

// synthCohort is what buildCohort made.
type synthCohort struct {
	Wear         []synthParticipant
	ProtocolID   int
	Coordinators []db.User
	Participants int64
	Cases        int64
	WorkingCases []int64 // ids of cases still being worked, for the case page
	Flagged      []int64 // participants with a case, for the participant page
	Results      int64   // screening results stored by SQL
}

// resultTemplates screens one synthetic week of each kind for real and
// returns the JSON of each result with its week number cut off, so SQL can
// store realistic results for participants without wear data.
func resultTemplates(seed uint64, p screen.Protocol, now time.Time) (negative, positive string, err error) {
	start := time.Date(2026, 1, 5, 0, 0, 0, 0, time.UTC)
	for pid := int64(1); negative == "" || positive == ""; pid++ {
		if pid > 100_000 {
			return "", "", fmt.Errorf("bench: no screen-positive synthetic week found")
		}
		w := synthWeek(seed, pid, 0, start)
		res, err := screen.Screen(&w, p, now.UnixMilli(), nil)
		if err != nil {
			return "", "", fmt.Errorf("bench: screen a synthetic week: %w", err)
		}
		b, err := json.Marshal(res)
		if err != nil {
			return "", "", err
		}
		const head = `{"week":0`
		if !strings.HasPrefix(string(b), head) {
			return "", "", fmt.Errorf("bench: unexpected result JSON %.40s", b)
		}
		switch {
		case res.Verdict == screen.Positive && positive == "":
			positive = string(b)[len(head):]
		case res.Verdict == screen.Negative && negative == "":
			negative = string(b)[len(head):]
		}
	}
	return negative, positive, nil
}

// buildCohort fills an empty migrated database with the synthetic study: a
// study of o.Participants over four sites, recruited over twice the weeks of
// follow-up (so about half are still giving data), staff accounts, and for
// everyone without wear data, screening results for every week so far (about
// 2% positive) and follow-up cases in every state for the positive ones, with
// contact attempts, recordings, over-reads and the audit event that opened
// each case. Everything is set by SQL in a few statements, so 20,000
// participants take seconds; the wear data goes through the importer later.
func buildCohort(ctx context.Context, store *db.Store, o Options, today cohort.Date) (synthCohort, error) {
	var c synthCohort
	pool := store.Pool()
	pv, err := store.EnsureDefaultProtocol(ctx)
	if err != nil {
		return c, err
	}
	c.ProtocolID = pv.ID
	neg, pos, err := resultTemplates(o.Seed, pv.Params, o.Now)
	if err != nil {
		return c, err
	}
	hash, err := credential.Hash(Password, credential.TestParams)
	if err != nil {
		return c, err
	}
	for i := 1; i <= 8; i++ {
		u, err := store.CreateUser(ctx, cohort.System, db.NewUser{Email: fmt.Sprintf("coordinator%d@bench.example.org", i),
			Name: fmt.Sprintf("Synthetic Coordinator %d", i), Role: cohort.Coordinator, PasswordHash: hash})
		if err != nil {
			return c, err
		}
		c.Coordinators = append(c.Coordinators, u)
	}
	for _, r := range []cohort.Role{cohort.Investigator, cohort.Monitor, cohort.Admin} {
		if _, err := store.CreateUser(ctx, cohort.System, db.NewUser{Email: string(r) + "@bench.example.org",
			Name: "Synthetic " + r.Label(), Role: r, PasswordHash: hash}); err != nil {
			return c, err
		}
	}
	// The bench measures pages, not sign-in: its synthetic staff sign in with
	// a password alone, as in the demo.
	if err := store.SetSecondFactorRequired(ctx, cohort.System, false); err != nil {
		return c, err
	}
	owners := make([]int64, len(c.Coordinators))
	for i, u := range c.Coordinators {
		owners[i] = u.ID
	}
	recruitDays := 14*o.Weeks + 14
	start := today.AddDays(-recruitDays)
	steps := []struct {
		what string
		sql  string
		args []any
	}{
		{"study", `INSERT INTO study (id, name, time_zone, contact_route, enrolment_target, follow_up_weeks)
			VALUES (1, 'Synthetic load study', 'UTC', 'Study office: reply through the secure message line quoting the referral code.', $1, $2)`,
			[]any{o.Participants + o.Participants/4, o.Weeks}},
		{"sites", `INSERT INTO sites (code, name, time_zone, target, opened_on) VALUES
			('SYN', 'North synthetic clinic', 'UTC', $1, $2::date), ('SYS', 'South synthetic clinic', 'UTC', $1, $2::date),
			('SYE', 'East synthetic clinic', 'UTC', $1, $2::date), ('SYW', 'West synthetic clinic', 'UTC', $1, $2::date)`,
			[]any{(o.Participants + o.Participants/4) / 4, start.String()}},
		// Participants 1..wear enrol in the first week of recruitment, so
		// their weeks of wear data are all complete; the rest spread evenly.
		{"participants", `INSERT INTO participants (study_id, site_id, sex, age_at_enrolment, time_zone, enrolled_on, consent_version,
			  watch_model, rr_capable, hypertension, diabetes, heart_failure, prior_stroke, vascular_disease)
			SELECT 'SY-' || lpad(g::text, 6, '0'), 1 + g % 4, CASE WHEN g % 2 = 0 THEN 'F' ELSE 'M' END, 55 + (g * 7) % 35, 'UTC',
			       CASE WHEN g <= $2 THEN $3::date + g % 7 ELSE $3::date + ((g - 1)::bigint * $4 / $1)::int END,
			       '1.0', 'synthetic wrist unit', false, g % 3 = 0, g % 7 = 0, g % 41 = 0, g % 53 = 0, g % 17 = 0
			FROM generate_series(1, $1) g`, []any{o.Participants, o.WearParticipants, start.String(), recruitDays}},
		{"identities", `INSERT INTO participant_identity (participant_id, given_name, family_name, birth_date, phone, email, street, city, zip, device_serial)
			SELECT id, (ARRAY['Ama','Bel','Cor','Dal','Esk','Fen','Gal','Hob','Ivo','Jun'])[1 + id % 10] || (ARRAY['ra','lin','wen','dor','sa','mik','tor','vel'])[1 + (id / 10) % 8],
			       (ARRAY['Brack','Culm','Dreel','Esker','Frome','Gisel','Hathe','Ilby'])[1 + (id / 80) % 8] || (ARRAY['well','ton','by','ham','wick','den'])[1 + (id / 640) % 6],
			       enrolled_on - (age_at_enrolment * 365 + id % 300)::int, '555-01' || lpad((id % 100)::text, 2, '0'), 'p' || id || '@example.org',
			       (id % 900 + 1) || ' Synthetic Lane', 'Rivermouth', '0' || lpad((id % 9999)::text, 4, '0'), 'SYN' || lpad(id::text, 8, '0')
			FROM participants`, nil},
		{"protocol", `UPDATE protocols SET used = true WHERE id = $1`, []any{c.ProtocolID}},
		// Millions of results by one statement: the trigger that marks
		// their participants for the kept figures would hold them all;
		// the run computes every participant's figures afterwards instead
		// (db.Store.RebuildFigures).
		{"figures marks off", `ALTER TABLE screen_results DISABLE TRIGGER screen_results_mark_ins`, nil},
		// Results of every week so far for everyone without wear data (the
		// screener makes those of the others); about 2% of weeks positive.
		{"screening results", `INSERT INTO screen_results (participant_id, protocol_id, week, verdict, reason, result, input_digest, wear_hours)
			SELECT p.id, $1, w, v.verdict, v.verdict || ' (synthetic result)',
			       ('{"week":' || w || CASE WHEN v.verdict = 'positive' THEN $3 ELSE $4 END)::json, 'synthetic', 60 + (p.id + w) % 50
			FROM participants p
			CROSS JOIN LATERAL generate_series(0, least($5::int, ($6::date - p.enrolled_on) / 7) - 1) w
			CROSS JOIN LATERAL (SELECT CASE WHEN (p.id * 31 + w * 17) % 100 < 2 THEN 'positive' ELSE 'negative' END AS verdict) v
			WHERE p.id > $2`, []any{c.ProtocolID, o.WearParticipants, pos, neg, o.Weeks, today.String()}},
		// One case per participant with a positive week: 60% ended, the rest
		// in every working state, owned or not, with deadlines from five days
		// ago to ten days ahead, as the triage benchmark lays them out.
		{"cases", `INSERT INTO cases (participant_id, protocol_id, first_week, last_week, state, owner_id, flagged_at, next_action, due_at,
			  reached_at, recorder_sent_at, recording_back_at, over_read_at, closed_at, closing_note)
			SELECT f.participant_id, $1, f.first_week, f.last_week, s.state,
			       CASE WHEN s.state = 'open' AND f.participant_id % 2 = 0 THEN NULL ELSE ($2::bigint[])[1 + f.participant_id % cardinality($2::bigint[])] END,
			       now() - (20 + f.participant_id % 40) * interval '1 day',
			       CASE WHEN s.final THEN '' ELSE 'first_contact' END,
			       CASE WHEN s.final THEN NULL ELSE now() + ((f.participant_id % 16) - 5) * interval '1 day' + (f.participant_id % 24) * interval '1 hour' END,
			       CASE WHEN s.state IN ('reached', 'recorder_sent', 'recording_received', 'over_read', 'referred', 'closed_not_confirmed') THEN now() - interval '9 days' END,
			       CASE WHEN s.state IN ('recorder_sent', 'recording_received', 'over_read', 'referred', 'closed_not_confirmed') THEN now() - interval '7 days' END,
			       CASE WHEN s.state IN ('recording_received', 'over_read', 'referred', 'closed_not_confirmed') THEN now() - interval '3 days' END,
			       CASE WHEN s.state IN ('over_read', 'referred', 'closed_not_confirmed') THEN now() - interval '2 days' END,
			       CASE WHEN s.final THEN now() - interval '1 day' END,
			       CASE WHEN s.final THEN 'synthetic history' ELSE '' END
			FROM (SELECT participant_id, min(week) AS first_week, max(week) AS last_week FROM screen_results
			      WHERE protocol_id = $1 AND verdict = 'positive' GROUP BY participant_id) f
			CROSS JOIN LATERAL (SELECT st AS state, st IN ('referred', 'closed_not_confirmed', 'closed_unreachable', 'closed_declined') AS final
			  FROM (SELECT CASE f.participant_id % 20
			    WHEN 0 THEN 'open' WHEN 1 THEN 'open' WHEN 2 THEN 'open' WHEN 3 THEN 'contacting' WHEN 4 THEN 'contacting'
			    WHEN 5 THEN 'reached' WHEN 6 THEN 'recorder_sent' WHEN 7 THEN 'recording_received'
			    WHEN 8 THEN 'referred' WHEN 9 THEN 'referred' WHEN 10 THEN 'closed_unreachable' WHEN 11 THEN 'closed_declined'
			    ELSE 'closed_not_confirmed' END AS st) x) s`, []any{c.ProtocolID, owners}},
		{"figures marks on", `ALTER TABLE screen_results ENABLE TRIGGER screen_results_mark_ins`, nil},
		{"case weeks", `INSERT INTO case_weeks (participant_id, protocol_id, week, case_id)
			SELECT sr.participant_id, sr.protocol_id, sr.week, c.id FROM screen_results sr JOIN cases c ON c.participant_id = sr.participant_id
			WHERE sr.verdict = 'positive' AND sr.protocol_id = $1`, []any{c.ProtocolID}},
		{"case audit", `INSERT INTO audit_events (at, actor, action, object_type, object_id, new_value)
			SELECT flagged_at, 'system', 'case.open', 'case', id::text, jsonb_build_object('state', 'open', 'weeks', first_week) FROM cases`, nil},
		{"contact attempts", `INSERT INTO contact_attempts (case_id, participant_id, at, channel, outcome)
			SELECT c.id, c.participant_id, c.flagged_at + k * interval '1 day', 'phone', CASE WHEN k = 3 THEN 'reached' ELSE 'no_answer' END
			FROM cases c CROSS JOIN generate_series(1, 3) k WHERE c.state <> 'open'`, nil},
		{"recordings", `INSERT INTO recordings (case_id, participant_id, taken_at, duration_s)
			SELECT id, participant_id, recording_back_at, 30 FROM cases WHERE recording_back_at IS NOT NULL`, nil},
		{"over-reads", `INSERT INTO over_reads (recording_id, case_id, participant_id, role, rhythm, reader, read_on)
			SELECT r.id, r.case_id, r.participant_id, 'first', CASE WHEN c.state = 'referred' THEN 'af' ELSE 'sinus' END, 'synthetic reader', current_date
			FROM recordings r JOIN cases c ON c.id = r.case_id WHERE c.over_read_at IS NOT NULL`, nil},
		// Statistics and the visibility map, as autovacuum leaves tables a
		// little while after a bulk load (index-only scans need the latter).
		{"statistics", `VACUUM ANALYZE`, nil},
	}
	for _, st := range steps {
		if _, err := pool.Exec(ctx, st.sql, st.args...); err != nil {
			return c, fmt.Errorf("bench: build the synthetic cohort (%s): %w", st.what, err)
		}
	}
	if err := pool.QueryRow(ctx, `SELECT (SELECT count(*) FROM participants), (SELECT count(*) FROM cases), (SELECT count(*) FROM screen_results)`).
		Scan(&c.Participants, &c.Cases, &c.Results); err != nil {
		return c, err
	}
	rows, err := pool.Query(ctx, `SELECT id, study_id, enrolled_on FROM participants WHERE id <= $1 ORDER BY id`, o.WearParticipants)
	if err != nil {
		return c, err
	}
	for rows.Next() {
		var p synthParticipant
		var d time.Time
		if err := rows.Scan(&p.ID, &p.StudyID, &d); err != nil {
			return c, err
		}
		p.Enrolled = cohort.DateOf(d)
		c.Wear = append(c.Wear, p)
	}
	if err := rows.Err(); err != nil {
		return c, err
	}
	if err := pool.QueryRow(ctx, `SELECT coalesce(array_agg(id ORDER BY id), '{}') FROM cases WHERE closed_at IS NULL`).Scan(&c.WorkingCases); err != nil {
		return c, err
	}
	if err := pool.QueryRow(ctx, `SELECT coalesce(array_agg(DISTINCT participant_id), '{}') FROM cases`).Scan(&c.Flagged); err != nil {
		return c, err
	}
	return c, nil
}

// addThinWeeks gives every participant without generated wear data, except
// about 3% who stay silent, one sparse week of heart rate - a reading every
// half hour through their latest complete week - so the progress page's list
// of silent participants is as short as in a study whose watches report, not
// 19,500 long. The rows go in through COPY, encoded as the importer encodes
// them; the import has been measured by then, so they do not count in it.
func addThinWeeks(ctx context.Context, store *db.Store, o Options, today cohort.Date) (int, error) {
	rows, err := store.Pool().Query(ctx, `SELECT id, enrolled_on FROM participants WHERE id > $1 AND id % 33 <> 0 ORDER BY id`, o.WearParticipants)
	if err != nil {
		return 0, err
	}
	var out [][]any
	for rows.Next() {
		var id int64
		var d time.Time
		if err := rows.Scan(&id, &d); err != nil {
			rows.Close()
			return 0, err
		}
		enrolled := cohort.DateOf(d)
		week := min(o.Weeks, today.DaysSince(enrolled)/7) - 1
		if week < 0 {
			continue
		}
		start, _ := cohort.WeekBounds(enrolled, time.UTC, week)
		r := rand.New(rand.NewPCG(o.Seed, uint64(id)))
		var s cohort.Samples
		for t := start.UnixMilli(); t < start.UnixMilli()+7*24*3600_000; t += 30 * 60_000 {
			s.Append(t+int64(r.IntN(60_000)), int32(62+r.IntN(14)))
		}
		out = append(out, []any{id, int16(week), int16(cohort.HeartRate), int32(s.Len()), s.T[0], s.T[s.Len()-1], wear.Encode(s, cohort.HeartRate)})
	}
	if err := rows.Err(); err != nil {
		return 0, err
	}
	_, err = store.Pool().CopyFrom(ctx, pgx.Identifier{"wear_weeks"}, []string{"participant_id", "week", "kind", "n", "first_ms", "last_ms", "data"}, pgx.CopyFromRows(out))
	if err != nil {
		return 0, fmt.Errorf("bench: sparse weeks: %w", err)
	}
	_, err = store.Pool().Exec(ctx, `ANALYZE wear_weeks`)
	return len(out), err
}
