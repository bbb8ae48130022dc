package dbtest

import (
	"context"
	"strings"
	"testing"

	"cohortdesk/cohort"
	"cohortdesk/db"
)

// OutreachCases fills a fresh database with what sending messages needs: a
// study with a name and a contact route, a site, n participants RV-0001 ...
// with contact details on file (e-mail rv-0001@example.org, a phone number,
// a postal address; all invented), each with one open follow-up case, and
// the default message templates. It returns the case ids in study-ID order.
func OutreachCases(tb testing.TB, store *db.Store, n int) []int64 {
	tb.Helper()
	ctx := context.Background()
	pool := store.Pool()
	for _, q := range []string{
		`INSERT INTO study (id, name, time_zone, contact_route) VALUES (1, 'Riverside Rhythm Study', 'UTC', 'call 555-0100 on working days, 9:00 to 17:00')
		 ON CONFLICT (id) DO UPDATE SET contact_route = excluded.contact_route`,
		`INSERT INTO sites (code, name, time_zone) VALUES ('RV', 'Riverside clinic', 'UTC')`,
		`INSERT INTO participants (study_id, site_id, time_zone, enrolled_on)
		 SELECT 'RV-' || lpad(g::text, 4, '0'), 1, 'UTC', date '2026-01-05' FROM generate_series(1, $1) g`,
		`INSERT INTO participant_identity (participant_id, given_name, family_name, email, phone, street, city, zip)
		 SELECT id, 'Wren' || id, 'Alderby', lower(study_id) || '@example.org', '+1555010' || lpad(id::text, 4, '0'),
		        id || ' Mill Lane', 'Riverside', '5550' || (id % 10)
		 FROM participants`,
		`INSERT INTO protocols (name, version, params, active, used) VALUES ('weekly screen', 1, '{}', true, true)`,
		`INSERT INTO screen_results (participant_id, protocol_id, week, verdict, reason, result, input_digest, wear_hours)
		 SELECT id, 1, 3, 'positive', 'irregular windows above the limit', '{"irregular_share": 0.37}', 'digest', 98.5 FROM participants`,
	} {
		var err error
		if strings.Contains(q, "$1") {
			_, err = pool.Exec(ctx, q, n)
		} else {
			_, err = pool.Exec(ctx, q)
		}
		if err != nil {
			tb.Fatalf("dbtest: outreach cases: %v", err)
		}
	}
	if _, _, err := store.SyncCases(ctx, cohort.System, 1, nil); err != nil {
		tb.Fatalf("dbtest: outreach cases: sync: %v", err)
	}
	if err := store.EnsureDefaultTemplates(ctx); err != nil {
		tb.Fatalf("dbtest: outreach cases: templates: %v", err)
	}
	rows, err := pool.Query(ctx, `SELECT c.id FROM cases c JOIN participants p ON p.id = c.participant_id ORDER BY p.study_id`)
	if err != nil {
		tb.Fatal(err)
	}
	defer rows.Close()
	var ids []int64
	for rows.Next() {
		var id int64
		if err := rows.Scan(&id); err != nil {
			tb.Fatal(err)
		}
		ids = append(ids, id)
	}
	return ids
}
