package db

import (
	"context"
	"encoding/json"

	"github.com/jackc/pgx/v5"
)

// The import log: the imports stored, their refused rows, and imports whose
// process died before committing.

// MarkInterruptedImports marks imports whose process died before committing:
// no heartbeat for two minutes. Their data was never committed.
func (s *Store) MarkInterruptedImports(ctx context.Context) (int64, error) {
	tag, err := s.pool.Exec(ctx, `UPDATE imports SET status = 'interrupted', finished_at = now(),
		message = 'the import stopped before finishing (the server stopped or was killed); nothing from this file was stored - import it again'
		WHERE status = 'running' AND heartbeat_at < now() - interval '2 minutes'`)
	if err != nil {
		return 0, mapErr("mark interrupted imports", err)
	}
	return tag.RowsAffected(), nil
}

const importCols = `id, kind, file_name, encode(file_sha256, 'hex'), size_bytes, status, started_at, finished_at, actor,
	rows_total, accepted, rejected, duplicates, reasons, message, bytes_read`

func scanImport(r pgx.Row) (ImportReport, error) {
	var rep ImportReport
	var reasons []byte
	err := r.Scan(&rep.ID, &rep.Kind, &rep.FileName, &rep.SHA256, &rep.Size, &rep.Status, &rep.StartedAt, &rep.FinishedAt, &rep.Actor,
		&rep.Rows, &rep.Accepted, &rep.Rejected, &rep.Duplicates, &reasons, &rep.Message, &rep.BytesRead)
	if err == nil && len(reasons) > 0 {
		_ = json.Unmarshal(reasons, &rep.Reasons)
	}
	return rep, err
}

// Import returns one import's report.
func (s *Store) Import(ctx context.Context, id int64) (ImportReport, error) {
	rep, err := scanImport(s.reader(ctx).QueryRow(ctx, `SELECT `+importCols+` FROM imports WHERE id = $1`, id))
	return rep, mapErr("import", err)
}

// Imports lists the latest imports, newest first.
func (s *Store) Imports(ctx context.Context, limit int) ([]ImportReport, error) {
	rows, err := s.reader(ctx).Query(ctx, `SELECT `+importCols+` FROM imports ORDER BY id DESC LIMIT $1`, limit)
	if err != nil {
		return nil, mapErr("imports", err)
	}
	defer rows.Close()
	var out []ImportReport
	for rows.Next() {
		rep, err := scanImport(rows)
		if err != nil {
			return nil, mapErr("imports", err)
		}
		out = append(out, rep)
	}
	return out, mapErr("imports", rows.Err())
}

// Reject is one quarantined row.
type Reject struct {
	Line    int64
	Entry   *int32 // FHIR Bundle entry index
	Reason  string
	Message string
	Raw     string
}

// EachReject streams an import's quarantined rows in line order.
func (s *Store) EachReject(ctx context.Context, importID int64, fn func(Reject) error) error {
	rows, err := s.reader(ctx).Query(ctx, `SELECT line, entry, reason, message, raw FROM import_rejects WHERE import_id = $1 ORDER BY seq`, importID)
	if err != nil {
		return mapErr("rejects", err)
	}
	defer rows.Close()
	for rows.Next() {
		var rj Reject
		if err := rows.Scan(&rj.Line, &rj.Entry, &rj.Reason, &rj.Message, &rj.Raw); err != nil {
			return mapErr("rejects", err)
		}
		if err := fn(rj); err != nil {
			return err
		}
	}
	return mapErr("rejects", rows.Err())
}
