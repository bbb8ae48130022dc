package db

import (
	"context"
	"crypto/sha256"
	"fmt"
	"io"
	"sort"
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

type verdictKey struct {
	pid         int64
	week        int
	model, mver string
}

type verdictVal struct {
	score   *float64
	verdict string
	line    int
}

// ImportVerdicts reads a CSV of verdicts from another algorithm (see
// wear.VerdictReader) and stores the good lines beside our own results, in one
// transaction: the file's verdicts, its refused lines and its import record
// commit together or not at all. Refused lines are reported with line numbers
// and reasons. Importing the same file again changes no verdict: each line is
// then a duplicate. A file that cannot be read at all (wrong header) is
// recorded as failed and returned as a validation error on "file".
func (s *Store) ImportVerdicts(ctx context.Context, a cohort.Actor, name string, r io.Reader) (VerdictImport, error) {
	out := VerdictImport{File: name, ByReason: map[string]int{}}
	h := sha256.New()
	counter := &byteCounter{r: io.TeeReader(r, h)}
	vr := wear.NewVerdictReader(counter, name)
	var rows []wear.VerdictRow
	reject := func(line int, code, label, field, msg, raw string) {
		out.Rejected++
		out.ByReason[label]++
		if len(out.Rejections) < maxStoredRejects {
			out.Rejections = append(out.Rejections, VerdictRejection{Line: line, Code: code, Reason: label, Field: field, Message: msg, Raw: raw})
		}
	}
	for vr.Next() {
		out.Rows++
		if rej := vr.Rejection(); rej != nil {
			reject(rej.Line, rej.Reason.String(), rej.Reason.Label(), rej.Field, rej.Msg, rej.Raw)
			continue
		}
		row := vr.Verdict()
		if len(row.ModelName) > 100 || len(row.ModelVersion) > 100 {
			reject(row.Line, wear.ReasonOutOfRange.String(), wear.ReasonOutOfRange.Label(), "model_name", "model name and version must be at most 100 characters each", "")
			continue
		}
		if row.Week > 32767 {
			reject(row.Line, wear.ReasonBadWeek.String(), wear.ReasonBadWeek.Label(), "study_week", fmt.Sprintf("study week %d is beyond any study", row.Week), "")
			continue
		}
		rows = append(rows, row)
	}
	_, _ = io.Copy(io.Discard, counter) // hash the whole file even after an early stop
	out.SHA256 = fmt.Sprintf("%x", h.Sum(nil))
	if err := vr.Err(); err != nil {
		msg := err.Error()
		if ferr := s.recordFailedImport(ctx, a, name, h.Sum(nil), counter.n, msg); ferr != nil {
			return out, ferr
		}
		return out, &cohort.ValidationError{Fields: map[string]string{"file": "the file could not be read, nothing was stored: " + msg}}
	}

	// Map study IDs to participants; unknown ones are refused line by line.
	ids := map[string]int64{}
	var studyIDs []string
	for _, row := range rows {
		if _, ok := ids[row.StudyID]; !ok {
			ids[row.StudyID] = 0
			studyIDs = append(studyIDs, row.StudyID)
		}
	}
	if len(studyIDs) > 0 {
		prows, err := s.pool.Query(ctx, `SELECT study_id, id FROM participants WHERE study_id = ANY($1)`, studyIDs)
		if err != nil {
			return out, mapErr("verdict participants", err)
		}
		for prows.Next() {
			var sid string
			var id int64
			if err := prows.Scan(&sid, &id); err != nil {
				prows.Close()
				return out, mapErr("verdict participants", err)
			}
			ids[sid] = id
		}
		if err := prows.Err(); err != nil {
			return out, mapErr("verdict participants", err)
		}
	}

	// One value per key: exact repeats are duplicates, different ones refused.
	seen := map[verdictKey]verdictVal{}
	var keep []verdictKey
	var late []VerdictRejection
	for _, row := range rows {
		pid := ids[row.StudyID]
		if pid == 0 {
			late = append(late, VerdictRejection{Line: row.Line, Code: wear.ReasonUnknownParticipant.String(), Reason: wear.ReasonUnknownParticipant.Label(),
				Field: "study_id", Message: fmt.Sprintf("study ID %q matches no enrolled participant", row.StudyID)})
			continue
		}
		k := verdictKey{pid, row.Week, row.ModelName, row.ModelVersion}
		v := verdictVal{verdict: string(row.Verdict), line: row.Line}
		if row.HasScore {
			sc := row.Score
			v.score = &sc
		}
		if prev, ok := seen[k]; ok {
			if prev.verdict == v.verdict && sameScore(prev.score, v.score) {
				out.Duplicates++
				continue
			}
			late = append(late, VerdictRejection{Line: row.Line, Code: ReasonConflictingRow, Reason: "conflicts with an earlier line",
				Field: "verdict", Message: fmt.Sprintf("line %d gave this participant, week and model another verdict or score", prev.line)})
			continue
		}
		seen[k] = v
		keep = append(keep, k)
	}
	for _, rj := range late {
		reject(rj.Line, rj.Code, rj.Reason, rj.Field, rj.Message, rj.Raw)
	}
	sort.SliceStable(out.Rejections, func(i, j int) bool { return out.Rejections[i].Line < out.Rejections[j].Line })

	pids := make([]int64, len(keep))
	weeks := make([]int16, len(keep))
	models := make([]string, len(keep))
	mvers := make([]string, len(keep))
	scores := make([]*float64, len(keep))
	verdicts := make([]string, len(keep))
	for i, k := range keep {
		v := seen[k]
		pids[i], weeks[i], models[i], mvers[i], scores[i], verdicts[i] = k.pid, int16(k.week), k.model, k.mver, v.score, v.verdict
	}

	err := s.inTx(ctx, func(tx pgx.Tx) error {
		var actorID *int64
		if a.UserID != 0 {
			actorID = &a.UserID
		}
		if err := tx.QueryRow(ctx, `INSERT INTO imports (kind, file_name, file_sha256, size_bytes, status, finished_at, actor_id, actor,
			rows_total, rejected, bytes_read) VALUES ('verdicts_csv', $1, $2, $3, 'running', NULL, $4, $5, $6, $7, $3) RETURNING id`,
			name, h.Sum(nil), counter.n, actorID, a.Label(), out.Rows, out.Rejected).Scan(&out.ImportID); err != nil {
			return err
		}
		if len(keep) > 0 {
			if err := tx.QueryRow(ctx, `
				WITH u AS (
				  SELECT * FROM unnest($1::bigint[], $2::smallint[], $3::text[], $4::text[], $5::float8[], $6::text[])
				         AS u(pid, week, model, mver, score, verdict)
				), ins AS (
				  INSERT INTO external_verdicts AS ev (participant_id, week, model_name, model_version, score, verdict, import_id)
				  SELECT pid, week, model, mver, score, verdict, $7 FROM u
				  ON CONFLICT (participant_id, week, model_name, model_version) DO UPDATE
				    SET score = excluded.score, verdict = excluded.verdict, import_id = excluded.import_id
				    WHERE ev.score IS DISTINCT FROM excluded.score OR ev.verdict IS DISTINCT FROM excluded.verdict
				  RETURNING (xmax = 0) AS added
				)
				SELECT count(*) FILTER (WHERE added), count(*) FILTER (WHERE NOT added) FROM ins`,
				pids, weeks, models, mvers, scores, verdicts, out.ImportID).Scan(&out.Added, &out.Replaced); err != nil {
				return err
			}
		}
		out.Duplicates += len(keep) - out.Added - out.Replaced
		out.Accepted = out.Rows - out.Rejected
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
		for _, rj := range out.Rejections {
			reasons[rj.Code]++
		}
		if _, err := tx.Exec(ctx, `UPDATE imports SET status = 'done', finished_at = clock_timestamp(), accepted = $2, duplicates = $3,
			reasons = $4, message = $5 WHERE id = $1`, out.ImportID, out.Accepted, out.Duplicates, reasons, out.Summary()); err != nil {
			return err
		}
		return audit(ctx, tx, a, "verdicts.import", "import", strconv.FormatInt(out.ImportID, 10), nil, map[string]any{
			"file": name, "sha256": out.SHA256, "rows": out.Rows, "added": out.Added, "replaced": out.Replaced,
			"duplicates": out.Duplicates, "rejected": out.Rejected})
	})
	return out, mapErr("import verdicts", err)
}

// Summary is the import in one line.
func (v VerdictImport) Summary() string {
	return fmt.Sprintf("%d lines: %d new, %d changed, %d duplicates, %d refused", v.Rows, v.Added, v.Replaced, v.Duplicates, v.Rejected)
}

func sameScore(a, b *float64) bool {
	if a == nil || b == nil {
		return a == nil && b == nil
	}
	return *a == *b
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
	rows, err := s.pool.Query(ctx, `SELECT week, model_name, model_version, score, verdict, coalesce(import_id, 0)
		FROM external_verdicts WHERE participant_id = $1 ORDER BY week, model_name, model_version`, participantID)
	if err != nil {
		return nil, mapErr("external verdicts", err)
	}
	out, err := pgx.CollectRows(rows, func(r pgx.CollectableRow) (ExternalVerdict, error) {
		var v ExternalVerdict
		var week int16
		err := r.Scan(&week, &v.ModelName, &v.ModelVersion, &v.Score, &v.Verdict, &v.ImportID)
		v.Week = int(week)
		return v, err
	})
	return out, mapErr("external verdicts", err)
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
	rows, err := s.pool.Query(ctx, `SELECT id, kind, file_name, status, actor, started_at, rows_total, accepted, rejected, duplicates, message
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
