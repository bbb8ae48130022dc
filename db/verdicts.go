package db

import (
	"context"
	"crypto/sha256"
	"fmt"
	"io"
	"strconv"
	"strings"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/screen"
	"cohortdesk/cohort/wear"

	"github.com/jackc/pgx/v5"
)

// ReasonConflictingRow is the rejection code of a verdicts line that repeats
// an earlier line's participant, week and model with a different verdict or
// score: neither can be preferred, so the later one is refused.
const ReasonConflictingRow = "conflicting_row"

// maxStoredRejects bounds the quarantined lines kept per file; every rejection
// is still counted.
const maxStoredRejects = 10000

// VerdictRejection is one refused line of a verdicts file.
type VerdictRejection struct {
	Line    int
	Code    string // stable reason code
	Reason  string // short label
	Field   string
	Message string
	Raw     string
}

// VerdictImport reports what one verdicts file did.
type VerdictImport struct {
	ImportID   int64
	File       string
	SHA256     string
	Rows       int // lines with data
	Accepted   int // lines stored or already stored
	Added      int // new participant-week-model verdicts
	Replaced   int // verdicts whose score or call changed
	Duplicates int // lines identical to what was stored, or to an earlier line
	Rejected   int
	ByReason   map[string]int // label -> count
	// Rejections are the refused lines in file order (at most 10,000 kept).
	Rejections []VerdictRejection
}

// verdictBatch is how many lines are parsed before they are copied to the
// staging table: memory holds one batch, whatever the file's size.
const verdictBatch = 8192

// ImportVerdicts reads a CSV of verdicts from another algorithm (see
// wear.VerdictReader) and stores the good lines beside our own results, in one
// transaction: the file's verdicts, its refused lines and its import record
// commit together or not at all. Refused lines are reported with line numbers
// and reasons. Importing the same file again changes no verdict: each line is
// then a duplicate. A file that cannot be read at all (wrong header) is
// recorded as failed and returned as a validation error on "file".
//
// The file streams, as the wear importer's does: lines are parsed a batch at
// a time and copied into a staging table inside the transaction, so memory
// holds one batch and the study's study IDs, whatever the file's size. The
// rules that need the whole file (a line repeating an earlier line's
// participant, week and model is a duplicate when it agrees with the first
// such line and refused when it does not) are applied to the staging table
// by SQL at the end.
func (s *Store) ImportVerdicts(ctx context.Context, a cohort.Actor, name string, r io.Reader) (VerdictImport, error) {
	out := VerdictImport{File: name, ByReason: map[string]int{}}
	h := sha256.New()
	counter := &byteCounter{r: io.TeeReader(r, h)}
	ids, err := s.studyIDs(ctx)
	if err != nil {
		return out, err
	}
	var readErr error
	err = s.inTx(ctx, func(tx pgx.Tx) error {
		var actorID *int64
		if a.UserID != 0 {
			actorID = &a.UserID
		}
		if err := tx.QueryRow(ctx, `INSERT INTO imports (kind, file_name, file_sha256, size_bytes, status, finished_at, actor_id, actor)
			VALUES ('verdicts_csv', $1, '', 0, 'running', NULL, $2, $3) RETURNING id`, name, actorID, a.Label()).Scan(&out.ImportID); err != nil {
			return err
		}
		if _, err := tx.Exec(ctx, `
			CREATE TEMP TABLE verdict_stage (line bigint, pid bigint, week smallint, model text, mver text, score float8, verdict text) ON COMMIT DROP;
			CREATE TEMP TABLE verdict_refused (line bigint, code text, label text, field text, message text, raw text) ON COMMIT DROP`); err != nil {
			return err
		}
		var good, refused [][]any
		refuse := func(line int, code, label, field, msg, raw string) {
			out.Rejected++
			out.ByReason[label]++
			refused = append(refused, []any{int64(line), code, label, field, msg, raw})
		}
		flush := func() error {
			if len(good) > 0 {
				if _, err := tx.CopyFrom(ctx, pgx.Identifier{"verdict_stage"}, []string{"line", "pid", "week", "model", "mver", "score", "verdict"}, pgx.CopyFromRows(good)); err != nil {
					return err
				}
			}
			if len(refused) > 0 {
				if _, err := tx.CopyFrom(ctx, pgx.Identifier{"verdict_refused"}, []string{"line", "code", "label", "field", "message", "raw"}, pgx.CopyFromRows(refused)); err != nil {
					return err
				}
			}
			good, refused = good[:0], refused[:0]
			return nil
		}
		vr := wear.NewVerdictReader(counter, name)
		for vr.Next() {
			out.Rows++
			if rej := vr.Rejection(); rej != nil {
				refuse(rej.Line, rej.Reason.String(), rej.Reason.Label(), rej.Field, rej.Msg, rej.Raw)
			} else if row := vr.Verdict(); len(row.ModelName) > 100 || len(row.ModelVersion) > 100 {
				refuse(row.Line, wear.ReasonOutOfRange.String(), wear.ReasonOutOfRange.Label(), "model_name", "model name and version must be at most 100 characters each", "")
			} else if row.Week > 32767 {
				refuse(row.Line, wear.ReasonBadWeek.String(), wear.ReasonBadWeek.Label(), "study_week", fmt.Sprintf("study week %d is beyond any study", row.Week), "")
			} else if pid := ids[row.StudyID]; pid == 0 {
				refuse(row.Line, wear.ReasonUnknownParticipant.String(), wear.ReasonUnknownParticipant.Label(), "study_id",
					fmt.Sprintf("study ID %q matches no enrolled participant", row.StudyID), "")
			} else {
				var score *float64
				if row.HasScore {
					sc := row.Score
					score = &sc
				}
				good = append(good, []any{int64(row.Line), pid, int16(row.Week), row.ModelName, row.ModelVersion, score, string(row.Verdict)})
			}
			if len(good)+len(refused) >= verdictBatch {
				if err := flush(); err != nil {
					return err
				}
			}
		}
		_, _ = io.Copy(io.Discard, counter) // hash the whole file even after an early stop
		out.SHA256 = fmt.Sprintf("%x", h.Sum(nil))
		if readErr = vr.Err(); readErr != nil {
			return readErr // nothing of the file is kept; the failure is recorded below
		}
		if err := flush(); err != nil {
			return err
		}
		return s.settleVerdicts(ctx, tx, a, name, h.Sum(nil), counter.n, &out)
	})
	if readErr != nil {
		msg := readErr.Error()
		if ferr := s.recordFailedImport(ctx, a, name, h.Sum(nil), counter.n, msg); ferr != nil {
			return out, ferr
		}
		return out, &cohort.ValidationError{Fields: map[string]string{"file": "the file could not be read, nothing was stored: " + msg}}
	}
	return out, mapErr("import verdicts", err)
}

// studyIDs maps every participant's study ID to their id.
func (s *Store) studyIDs(ctx context.Context) (map[string]int64, error) {
	rows, err := s.pool.Query(ctx, `SELECT study_id, id FROM participants`)
	if err != nil {
		return nil, mapErr("verdict participants", err)
	}
	defer rows.Close()
	ids := map[string]int64{}
	for rows.Next() {
		var sid string
		var id int64
		if err := rows.Scan(&sid, &id); err != nil {
			return nil, mapErr("verdict participants", err)
		}
		ids[sid] = id
	}
	return ids, mapErr("verdict participants", rows.Err())
}

// settleVerdicts applies the whole-file rules to the staged lines and stores
// the result: per participant, week and model the first line counts; a later
// line that agrees with it is a duplicate, one that does not is refused. The
// first lines are merged into external_verdicts, the refused lines (the first
// maxStoredRejects by line) kept in import_rejects, and the import recorded
// and audited.
func (s *Store) settleVerdicts(ctx context.Context, tx pgx.Tx, a cohort.Actor, name string, sum []byte, size int64, out *VerdictImport) error {
	const ranked = `
		SELECT s.*, first_value(line) OVER w AS first_line, first_value(score) OVER w AS first_score, first_value(verdict) OVER w AS first_verdict
		FROM verdict_stage s WINDOW w AS (PARTITION BY pid, week, model, mver ORDER BY line)`
	var dups, conflicts int
	if err := tx.QueryRow(ctx, `
		WITH r AS (`+ranked+`), later AS (
		  SELECT *, verdict = first_verdict AND score IS NOT DISTINCT FROM first_score AS same FROM r WHERE line <> first_line
		), ins AS (
		  INSERT INTO verdict_refused (line, code, label, field, message, raw)
		  SELECT line, $1, 'conflicts with an earlier line', 'verdict',
		         'line ' || first_line || ' gave this participant, week and model another verdict or score', '' FROM later WHERE NOT same
		  RETURNING 1
		)
		SELECT (SELECT count(*) FROM later WHERE same), (SELECT count(*) FROM ins)`, ReasonConflictingRow).Scan(&dups, &conflicts); err != nil {
		return err
	}
	out.Duplicates += dups
	out.Rejected += conflicts
	if conflicts > 0 {
		out.ByReason["conflicts with an earlier line"] += conflicts
	}
	var kept int
	if err := tx.QueryRow(ctx, `
		WITH first AS (
		  SELECT DISTINCT ON (pid, week, model, mver) pid, week, model, mver, score, verdict FROM verdict_stage ORDER BY pid, week, model, mver, line
		), ins AS (
		  INSERT INTO external_verdicts AS ev (participant_id, week, model_name, model_version, score, verdict, import_id)
		  SELECT pid, week, model, mver, score, verdict, $1 FROM first
		  ON CONFLICT (participant_id, week, model_name, model_version) DO UPDATE
		    SET score = excluded.score, verdict = excluded.verdict, import_id = excluded.import_id
		    WHERE ev.score IS DISTINCT FROM excluded.score OR ev.verdict IS DISTINCT FROM excluded.verdict
		  RETURNING (xmax = 0) AS added
		)
		SELECT (SELECT count(*) FROM first), count(*) FILTER (WHERE added), count(*) FILTER (WHERE NOT added) FROM ins`,
		out.ImportID).Scan(&kept, &out.Added, &out.Replaced); err != nil {
		return err
	}
	out.Duplicates += kept - out.Added - out.Replaced
	out.Accepted = out.Rows - out.Rejected
	// The refused lines in line order, the first maxStoredRejects kept.
	rows, err := tx.Query(ctx, `SELECT line, code, label, field, message, raw FROM verdict_refused ORDER BY line LIMIT $1`, maxStoredRejects)
	if err != nil {
		return err
	}
	out.Rejections, err = pgx.CollectRows(rows, func(r pgx.CollectableRow) (VerdictRejection, error) {
		var rj VerdictRejection
		var line int64
		err := r.Scan(&line, &rj.Code, &rj.Reason, &rj.Field, &rj.Message, &rj.Raw)
		rj.Line = int(line)
		return rj, err
	})
	if err != nil {
		return err
	}
	if len(out.Rejections) > 0 {
		src := make([][]any, len(out.Rejections))
		for i, rj := range out.Rejections {
			msg := rj.Message
			if rj.Field != "" && !strings.Contains(msg, rj.Field) {
				msg = rj.Field + ": " + msg
			}
			src[i] = []any{out.ImportID, int32(i + 1), int64(rj.Line), rj.Code, msg, rj.Raw}
		}
		if _, err := tx.CopyFrom(ctx, pgx.Identifier{"import_rejects"}, []string{"import_id", "seq", "line", "reason", "message", "raw"}, pgx.CopyFromRows(src)); err != nil {
			return err
		}
	}
	reasons := map[string]int{}
	if err := func() error {
		rows, err := tx.Query(ctx, `SELECT code, count(*) FROM verdict_refused GROUP BY code`)
		if err != nil {
			return err
		}
		defer rows.Close()
		for rows.Next() {
			var code string
			var n int
			if err := rows.Scan(&code, &n); err != nil {
				return err
			}
			reasons[code] = n
		}
		return rows.Err()
	}(); err != nil {
		return err
	}
	if _, err := tx.Exec(ctx, `UPDATE imports SET status = 'done', finished_at = clock_timestamp(), file_sha256 = $2, size_bytes = $3, bytes_read = $3,
		rows_total = $4, rejected = $5, accepted = $6, duplicates = $7, reasons = $8, message = $9 WHERE id = $1`,
		out.ImportID, sum, size, out.Rows, out.Rejected, out.Accepted, out.Duplicates, reasons, out.Summary()); err != nil {
		return err
	}
	return audit(ctx, tx, a, "verdicts.import", "import", strconv.FormatInt(out.ImportID, 10), nil, map[string]any{
		"file": name, "sha256": out.SHA256, "rows": out.Rows, "added": out.Added, "replaced": out.Replaced,
		"duplicates": out.Duplicates, "rejected": out.Rejected})
}

// Summary is the import in one line.
func (v VerdictImport) Summary() string {
	return fmt.Sprintf("%d lines: %d new, %d changed, %d duplicates, %d refused", v.Rows, v.Added, v.Replaced, v.Duplicates, v.Rejected)
}

// recordFailedImport keeps the record of a file refused as a whole.
func (s *Store) recordFailedImport(ctx context.Context, a cohort.Actor, name string, sum []byte, size int64, msg string) error {
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		var actorID *int64
		if a.UserID != 0 {
			actorID = &a.UserID
		}
		var id int64
		if err := tx.QueryRow(ctx, `INSERT INTO imports (kind, file_name, file_sha256, size_bytes, status, finished_at, actor_id, actor, message, bytes_read)
			VALUES ('verdicts_csv', $1, $2, $3, 'failed', clock_timestamp(), $4, $5, $6, $3) RETURNING id`,
			name, sum, size, actorID, a.Label(), msg).Scan(&id); err != nil {
			return err
		}
		return audit(ctx, tx, a, "verdicts.import_failed", "import", strconv.FormatInt(id, 10), nil, map[string]any{"file": name, "error": msg})
	})
	return mapErr("record failed import", err)
}

type byteCounter struct {
	r io.Reader
	n int64
}

// Read counts the bytes read through it.
func (c *byteCounter) Read(p []byte) (int, error) {
	n, err := c.r.Read(p)
	c.n += int64(n)
	return n, err
}

// ExternalVerdict is one verdict of another algorithm on a participant-week.
type ExternalVerdict struct {
	Week         int
	ModelName    string
	ModelVersion string
	Score        *float64
	Verdict      screen.Verdict
	ImportID     int64
}

// ExternalVerdicts lists a participant's external verdicts by week and model.
func (s *Store) ExternalVerdicts(ctx context.Context, participantID int64) ([]ExternalVerdict, error) {
	rows, err := s.reader(ctx).Query(ctx, externalSQL, participantID)
	if err != nil {
		return nil, mapErr("external verdicts", err)
	}
	out, err := pgx.CollectRows(rows, scanExternal)
	return out, mapErr("external verdicts", err)
}

// externalSQL reads a participant's ($1) external verdicts for scanExternal.
const externalSQL = `SELECT week, model_name, model_version, score, verdict, coalesce(import_id, 0)
		FROM external_verdicts WHERE participant_id = $1 ORDER BY week, model_name, model_version`

func scanExternal(r pgx.CollectableRow) (ExternalVerdict, error) {
	var v ExternalVerdict
	var week int16
	err := r.Scan(&week, &v.ModelName, &v.ModelVersion, &v.Score, &v.Verdict, &v.ImportID)
	v.Week = int(week)
	return v, err
}

// ImportRecord is one row of the import log.
type ImportRecord struct {
	ID         int64
	Kind       string
	File       string
	Status     string
	Actor      string
	StartedAt  time.Time
	Rows       int64
	Accepted   int64
	Rejected   int64
	Duplicates int64
	Message    string
}

// VerdictImports lists the most recent verdict files, newest first.
func (s *Store) VerdictImports(ctx context.Context, limit int) ([]ImportRecord, error) {
	if limit <= 0 || limit > 500 {
		limit = 20
	}
	rows, err := s.reader(ctx).Query(ctx, `SELECT id, kind, file_name, status, actor, started_at, rows_total, accepted, rejected, duplicates, message
		FROM imports WHERE kind = 'verdicts_csv' ORDER BY id DESC LIMIT $1`, limit)
	if err != nil {
		return nil, mapErr("verdict imports", err)
	}
	out, err := pgx.CollectRows(rows, func(r pgx.CollectableRow) (ImportRecord, error) {
		var m ImportRecord
		err := r.Scan(&m.ID, &m.Kind, &m.File, &m.Status, &m.Actor, &m.StartedAt, &m.Rows, &m.Accepted, &m.Rejected, &m.Duplicates, &m.Message)
		return m, err
	})
	return out, mapErr("verdict imports", err)
}
