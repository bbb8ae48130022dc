package db

import (
	"context"
	"errors"

	"github.com/jackc/pgx/v5"
)

// DecidingWindow is the window size (its index in the version's windows)
// whose criteria flagged the most of the version's screen-positive weeks, so
// the threshold sweep opens on a parameter that changes something. Before
// any week flags, it is the size with the most usable windows in the
// latest results. ok is false when the version has screened nothing.
func (s *Store) DecidingWindow(ctx context.Context, protocolID int) (index int, ok bool, err error) {
	err = s.pool.QueryRow(ctx, `
		SELECT w.ord - 1 FROM screen_results sr, json_array_elements(sr.result->'windows') WITH ORDINALITY AS w(v, ord)
		WHERE sr.protocol_id = $1 AND sr.verdict = 'positive'
		  AND (coalesce((w.v->>'run_met')::boolean, false) OR coalesce((w.v->>'share_met')::boolean, false))
		GROUP BY w.ord ORDER BY count(*) DESC, w.ord LIMIT 1`, protocolID).Scan(&index)
	if err == nil {
		return index, true, nil
	}
	if !errors.Is(err, pgx.ErrNoRows) {
		return 0, false, mapErr("deciding window", err)
	}
	err = s.pool.QueryRow(ctx, `
		SELECT w.ord - 1 FROM (SELECT result FROM screen_results WHERE protocol_id = $1 ORDER BY participant_id DESC, week DESC LIMIT 2000) sr,
		  json_array_elements(sr.result->'windows') WITH ORDINALITY AS w(v, ord)
		GROUP BY w.ord ORDER BY sum(coalesce((w.v->>'usable')::int, 0)) DESC, w.ord LIMIT 1`, protocolID).Scan(&index)
	if errors.Is(err, pgx.ErrNoRows) {
		return 0, false, nil
	}
	if err != nil {
		return 0, false, mapErr("deciding window", err)
	}
	return index, true, nil
}
