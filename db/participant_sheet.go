package db

import (
	"context"
	"errors"

	"github.com/jackc/pgx/v5"
)

// ParticipantSheet is what a participant's page shows besides the
// participant and their identity: the weekly timeline, the verdicts of other
// algorithms, the active protocol version with this participant's results
// under it, and the notes. One round trip reads it all.
type ParticipantSheet struct {
	Lines    []WeekLine
	External []ExternalVerdict
	// Protocol is the active version; HasProtocol is false before any is
	// active (Results is then empty).
	Protocol    ProtocolVersion
	HasProtocol bool
	Results     []StoredResult
	Notes       []Note
}

// ParticipantSheet reads a participant's sheet.
func (s *Store) ParticipantSheet(ctx context.Context, p Participant) (ParticipantSheet, error) {
	var sh ParticipantSheet
	st, err := s.StudySettings(ctx)
	if err != nil {
		return sh, err
	}
	b := &pgx.Batch{}
	lines := queueTimeline(b, p, st, s.now())
	b.Queue(externalSQL, p.ID).Query(func(rows pgx.Rows) (err error) {
		sh.External, err = pgx.CollectRows(rows, scanExternal)
		return err
	})
	b.Queue(`SELECT ` + protocolCols + ` FROM protocols WHERE active`).QueryRow(func(row pgx.Row) error {
		var err error
		sh.Protocol, err = scanProtocol(row)
		if errors.Is(err, pgx.ErrNoRows) {
			return nil
		}
		sh.HasProtocol = err == nil
		return err
	})
	b.Queue(`SELECT `+storedResultCols+` FROM screen_results
		WHERE participant_id = $1 AND protocol_id = (SELECT id FROM protocols WHERE active) ORDER BY week`, p.ID).Query(func(rows pgx.Rows) (err error) {
		sh.Results, err = pgx.CollectRows(rows, scanStoredResult)
		return err
	})
	b.Queue(notesSQL, p.ID).Query(func(rows pgx.Rows) (err error) {
		sh.Notes, err = pgx.CollectRows(rows, scanNote)
		return err
	})
	if err := s.readBatch(ctx, b, func(pgx.BatchResults) error { return nil }); err != nil {
		return sh, mapErr("participant sheet", err)
	}
	sh.Lines = lines()
	return sh, nil
}
