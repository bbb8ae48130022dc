package migrations_test

import (
	"context"
	"fmt"
	"slices"
	"strings"
	"testing"

	"cohortdesk/db/dbtest"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgxpool"
)

// The keying rule (README, "Scaling out"): the study's large tables can be
// spread over machines by participant. Every table is one of three kinds:
//
//   - keyed by participant (every table with a participant_id column, and
//     participants itself by its id): the participant id is in its primary
//     key and in every unique index, and every foreign key to another such
//     table pairs the two participant ids;
//   - small: read everywhere, copied to every machine (replicated);
//   - spread by its own key: large but never joined with a participant's
//     rows by key (logs, the study ID directory).
//
// A table nobody has classified fails the test, so a new table is a
// decision, not an accident.

// smallTables are copied to every machine: their size follows the number of
// sites, staff, protocol versions, days and categories, not participants.
var smallTables = map[string]string{
	"study":                  "one row",
	"sites":                  "a few rows per site",
	"users":                  "staff accounts",
	"protocols":              "protocol versions",
	"sweeps":                 "threshold sweeps asked for",
	"jobs":                   "background jobs; moves to the job queue's own node",
	"imports":                "one row per imported file",
	"exports":                "one row per export handed out",
	"sessions":               "signed-in staff",
	"sign_in_failures":       "pruned after a day",
	"goose_db_version":       "applied migrations",
	"figures_state":          "one row",
	"enrolment_counts":       "ledger by site and day",
	"figure_box_counts":      "ledger by version, site, day and box",
	"figure_week_counts":     "ledger by version, day and study week",
	"figure_stage_counts":    "ledger by version, site and subgroup",
	"figure_time_counts":     "ledger by version, subgroup and day",
	"figure_kappa_counts":    "ledger by version, site and category",
	"figure_unread_counts":   "ledger of one number",
	"protocol_result_counts": "ledger by protocol version",
	"message_status_counts":  "ledger by message status",
	"case_counts":            "ledger by state and hour",
	"sign_in_throttle":       "sign-in names and addresses, pruned",
	"second_factors":         "one per staff account",
	"recovery_codes":         "a few per staff account",
	"sign_in_policy":         "one row",
	"message_templates":      "template versions",
	"outreach_settings":      "one row",
	"letter_batches":         "one per printing",
	"morning_summaries":      "one per staff member and day",
}

// ownKeyTables are large but spread by their own key.
var ownKeyTables = map[string]string{
	"audit_events":   "append-only log, spread by id; read by time and object, never joined by participant",
	"import_rejects": "rows refused by an import, spread by import",
	"study_ids":      "directory from study ID to participant, spread by study ID; keeps study IDs unique",
	"audit_texts":    "free text audit events refer to, spread by id like the trail",
}

// keyingProblems lists every breach of the keying rule in the schema pool
// is connected to.
func keyingProblems(ctx context.Context, pool *pgxpool.Pool) ([]string, error) {
	rows, err := pool.Query(ctx, `
		SELECT c.relname, EXISTS (SELECT 1 FROM pg_attribute a WHERE a.attrelid = c.oid AND a.attname = 'participant_id' AND NOT a.attisdropped)
		FROM pg_class c JOIN pg_namespace n ON n.oid = c.relnamespace
		WHERE n.nspname = 'public' AND c.relkind IN ('r', 'p') ORDER BY 1`)
	if err != nil {
		return nil, err
	}
	type table struct {
		name  string
		keyed bool
	}
	tables, err := pgx.CollectRows(rows, func(r pgx.CollectableRow) (table, error) {
		var t table
		err := r.Scan(&t.name, &t.keyed)
		return t, err
	})
	if err != nil {
		return nil, err
	}
	keyCol := map[string]string{} // participant-keyed table -> its participant column
	var problems []string
	for _, t := range tables {
		_, small := smallTables[t.name]
		_, own := ownKeyTables[t.name]
		switch {
		case t.name == "participants":
			keyCol[t.name] = "id"
		case small || own:
			if t.keyed && small {
				problems = append(problems, fmt.Sprintf("%s has a participant_id but is listed as small", t.name))
			}
		case t.keyed:
			keyCol[t.name] = "participant_id"
		default:
			problems = append(problems, fmt.Sprintf("%s: neither keyed by participant nor listed as small or spread by its own key", t.name))
		}
	}
	// Primary keys and unique indexes (constraints or not) of keyed tables.
	rows, err = pool.Query(ctx, `
		SELECT t.relname, i.relname, x.indisprimary,
		       array(SELECT a.attname::text FROM unnest(x.indkey) k JOIN pg_attribute a ON a.attrelid = t.oid AND a.attnum = k)
		FROM pg_index x JOIN pg_class t ON t.oid = x.indrelid JOIN pg_class i ON i.oid = x.indexrelid
		JOIN pg_namespace n ON n.oid = t.relnamespace
		WHERE n.nspname = 'public' AND x.indisunique ORDER BY 1, 2`)
	if err != nil {
		return nil, err
	}
	for rows.Next() {
		var tbl, idx string
		var primary bool
		var cols []string
		if err := rows.Scan(&tbl, &idx, &primary, &cols); err != nil {
			rows.Close()
			return nil, err
		}
		key, ok := keyCol[tbl]
		if ok && !slices.Contains(cols, key) {
			kind := "unique index"
			if primary {
				kind = "primary key"
			}
			problems = append(problems, fmt.Sprintf("%s: %s %s (%s) lacks %s", tbl, kind, idx, strings.Join(cols, ", "), key))
		}
	}
	if err := rows.Err(); err != nil {
		return nil, err
	}
	// Foreign keys between keyed tables pair their participant columns.
	rows, err = pool.Query(ctx, `
		SELECT f.conname, t.relname, r.relname,
		       array(SELECT a.attname::text FROM unnest(f.conkey) WITH ORDINALITY k(n, o) JOIN pg_attribute a ON a.attrelid = f.conrelid AND a.attnum = k.n ORDER BY k.o),
		       array(SELECT a.attname::text FROM unnest(f.confkey) WITH ORDINALITY k(n, o) JOIN pg_attribute a ON a.attrelid = f.confrelid AND a.attnum = k.n ORDER BY k.o)
		FROM pg_constraint f JOIN pg_class t ON t.oid = f.conrelid JOIN pg_class r ON r.oid = f.confrelid
		JOIN pg_namespace n ON n.oid = t.relnamespace
		WHERE n.nspname = 'public' AND f.contype = 'f' ORDER BY 1`)
	if err != nil {
		return nil, err
	}
	for rows.Next() {
		var name, from, to string
		var cols, refs []string
		if err := rows.Scan(&name, &from, &to, &cols, &refs); err != nil {
			rows.Close()
			return nil, err
		}
		fk, okF := keyCol[from]
		tk, okT := keyCol[to]
		if !okF || !okT {
			continue
		}
		paired := false
		for i := range cols {
			if cols[i] == fk && refs[i] == tk {
				paired = true
			}
		}
		if !paired {
			problems = append(problems, fmt.Sprintf("%s: foreign key %s (%s) -> %s (%s) does not pair the participant ids",
				from, name, strings.Join(cols, ", "), to, strings.Join(refs, ", ")))
		}
	}
	return problems, rows.Err()
}

// TestSchemaKeyedByParticipant checks the keying rule on the migrated
// schema.
func TestSchemaKeyedByParticipant(t *testing.T) {
	problems, err := keyingProblems(context.Background(), dbtest.Pool(t))
	if err != nil {
		t.Fatal(err)
	}
	for _, p := range problems {
		t.Error(p)
	}
}

// TestSchemaKeyingFailsOnPlantedTables shows the check can fail: tables
// planted in a migrated schema, each breaking the rule one way, are each
// reported, and nothing else is.
func TestSchemaKeyingFailsOnPlantedTables(t *testing.T) {
	ctx := context.Background()
	pool := dbtest.Owner(t, dbtest.Pool(t)) // planting tables takes the schema's owner
	for _, q := range []string{
		// A participant's rows under a key of their own.
		`CREATE TABLE planted_pk (id bigint PRIMARY KEY, participant_id bigint NOT NULL)`,
		// Keyed right, but with a unique index that leaves the participant out.
		`CREATE TABLE planted_unique (participant_id bigint, code text, PRIMARY KEY (participant_id, code))`,
		`CREATE UNIQUE INDEX planted_unique_code ON planted_unique (code)`,
		// A foreign key to cases by case id alone (cases(id) made unique for it).
		`CREATE UNIQUE INDEX planted_cases_id ON cases (id)`,
		`CREATE TABLE planted_fk (participant_id bigint, case_id bigint REFERENCES cases (id), PRIMARY KEY (participant_id, case_id))`,
		// Nobody decided what this is.
		`CREATE TABLE planted_loose (label text PRIMARY KEY)`,
	} {
		if _, err := pool.Exec(ctx, q); err != nil {
			t.Fatalf("%s: %v", q, err)
		}
	}
	problems, err := keyingProblems(ctx, pool)
	if err != nil {
		t.Fatal(err)
	}
	want := []string{
		"cases: unique index planted_cases_id (id) lacks participant_id",
		"planted_fk: foreign key planted_fk_case_id_fkey (case_id) -> cases (id) does not pair the participant ids",
		"planted_loose: neither keyed by participant nor listed as small or spread by its own key",
		"planted_pk: primary key planted_pk_pkey (id) lacks participant_id",
		"planted_unique: unique index planted_unique_code (code) lacks participant_id",
	}
	slices.Sort(problems)
	if !slices.Equal(problems, want) {
		t.Errorf("problems:\n%s\nwant:\n%s", strings.Join(problems, "\n"), strings.Join(want, "\n"))
	}
}
