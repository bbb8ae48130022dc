package db

import (
	"context"

	"cohortdesk/cohort"
)

// BeginImport records an import whose file is still being received, so the
// imports list shows it and a server killed meanwhile leaves it to be marked
// interrupted at the next start. ReceivingImport reports progress;
// ImportReadings with ImportOptions.ID continues it once the file is in, or
// FailImport ends it.
func (s *Store) BeginImport(ctx context.Context, a cohort.Actor, kind, fileName string) (int64, error) {
	var actorID *int64
	if a.UserID != 0 {
		actorID = &a.UserID
	}
	var id int64
	err := s.pool.QueryRow(ctx, `INSERT INTO imports (kind, file_name, file_sha256, size_bytes, actor_id, actor, started_at, heartbeat_at)
		VALUES ($1, $2, '', 0, $3, $4, $5, $5) RETURNING id`, kind, fileName, actorID, a.Label(), s.now()).Scan(&id)
	return id, mapErr("import start", err)
}

// ReceivingImport records how much of an import's file has arrived (and that
// its server is alive).
func (s *Store) ReceivingImport(ctx context.Context, id, bytes int64) error {
	_, err := s.pool.Exec(ctx, `UPDATE imports SET bytes_read = $2, heartbeat_at = now() WHERE id = $1 AND status = 'running'`, id, bytes)
	return mapErr("import progress", err)
}

// FailImport ends an import whose file never arrived whole.
func (s *Store) FailImport(ctx context.Context, id int64, message string) error {
	_, err := s.pool.Exec(ctx, `UPDATE imports SET status = 'failed', message = $2, finished_at = $3 WHERE id = $1 AND status = 'running'`,
		id, message, s.now())
	return mapErr("import failed", err)
}
