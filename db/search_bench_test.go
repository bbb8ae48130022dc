package db_test

import (
	"context"
	"testing"
	"time"

	"cohortdesk/db"
	"cohortdesk/db/dbtest"

	"github.com/jackc/pgx/v5/pgxpool"
)

// The participant search at 100,000 participants: a part of a study ID typed
// in the box ("0173"), through the store as the list page asks for it (the
// counts and the first page), with the trigram index of migration 0091 and
// without it; and, as the baseline of what the list did before, the old
// prefix search (lower(study_id) LIKE 'q%') over the prefix index of
// migration 0008, made as plain SQL with the same counts and page.
//
//	go test ./db -run '^$' -bench StudyIDSearch -benchtime 50x
func searchStore(b *testing.B) (*db.Store, *pgxpool.Pool) {
	b.Helper()
	pool := dbtest.Pool(b)
	owner := dbtest.Owner(b, pool)
	ctx := context.Background()
	for _, q := range []string{
		`INSERT INTO sites (code, name) VALUES ('AA', 'Site A'), ('BB', 'Site B'), ('CC', 'Site C'), ('DD', 'Site D')`,
		`INSERT INTO participants (study_id, site_id, time_zone, enrolled_on)
		 SELECT (ARRAY['AAA','BBB','CCC','DDD'])[1 + g % 4] || '-' || lpad(g::text, 6, '0') || '-' || chr(65 + g % 26), 1 + g % 4, 'UTC', date '2026-01-01' + (g % 180)
		 FROM generate_series(1, 100000) g`,
		`VACUUM ANALYZE participants`,
	} {
		if _, err := owner.Exec(ctx, q); err != nil {
			b.Fatal(err)
		}
	}
	return db.New(pool, func() time.Time { return fixedNow }), owner
}

func BenchmarkStudyIDSearch(b *testing.B) {
	s, owner := searchStore(b)
	ctx := context.Background()
	exec := func(q string) {
		b.Helper()
		if _, err := owner.Exec(ctx, q); err != nil {
			b.Fatal(err)
		}
	}
	search := func(b *testing.B) {
		for b.Loop() {
			page, err := s.Participants(ctx, db.ParticipantFilter{Search: "0173", Limit: 50})
			if err != nil || page.Total == 0 {
				b.Fatalf("search: %d rows, %v", page.Total, err)
			}
		}
	}
	b.Run("anywhere/trigram-index", search)
	b.Run("anywhere/two-characters", func(b *testing.B) {
		for b.Loop() {
			page, err := s.Participants(ctx, db.ParticipantFilter{Search: "17", Limit: 50})
			if err != nil || page.Total == 0 {
				b.Fatalf("search: %d rows, %v", page.Total, err)
			}
		}
	})
	b.Run("anywhere/no-index", func(b *testing.B) {
		exec(`DROP INDEX participants_search_id_trgm_idx`)
		defer exec(`CREATE INDEX participants_search_id_trgm_idx ON participants USING gin (search_id gin_trgm_ops)`)
		search(b)
	})
	b.Run("prefix-before/prefix-index", func(b *testing.B) {
		exec(`CREATE INDEX bench_prefix_idx ON participants (lower(study_id) text_pattern_ops)`)
		defer exec(`DROP INDEX bench_prefix_idx`)
		exec(`ANALYZE participants`)
		for b.Loop() {
			var n int
			if err := owner.QueryRow(ctx, `SELECT count(*) FROM participants p WHERE lower(p.study_id) LIKE $1`, "aaa-0001%").Scan(&n); err != nil || n == 0 {
				b.Fatalf("prefix count: %d, %v", n, err)
			}
			rows, err := owner.Query(ctx, `SELECT p.id, p.study_id FROM participants p JOIN sites st ON st.id = p.site_id
				WHERE lower(p.study_id) LIKE $1 ORDER BY p.study_id LIMIT 51`, "aaa-0001%")
			if err != nil {
				b.Fatal(err)
			}
			rows.Close()
		}
	})
}
