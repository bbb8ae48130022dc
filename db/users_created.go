package db

import (
	"context"
	"strconv"

	"github.com/jackc/pgx/v5"
)

// UsersCreatedBy returns the ids of the accounts that a program (an actor
// without an account, such as the demo loader) created, from the audit trail.
// An administrator's creations carry their account and never match.
func (s *Store) UsersCreatedBy(ctx context.Context, program string) (map[int64]bool, error) {
	rows, err := s.pool.Query(ctx, `SELECT object_id FROM audit_events
		WHERE action = 'user.create' AND object_type = 'user' AND actor_id IS NULL AND actor = $1`, program)
	if err != nil {
		return nil, mapErr("users created by", err)
	}
	ids, err := pgx.CollectRows(rows, pgx.RowTo[string])
	if err != nil {
		return nil, mapErr("users created by", err)
	}
	out := make(map[int64]bool, len(ids))
	for _, s := range ids {
		if id, err := strconv.ParseInt(s, 10, 64); err == nil {
			out[id] = true
		}
	}
	return out, nil
}
