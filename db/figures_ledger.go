package db

import (
	"context"
	"fmt"
	"log/slog"
	"strings"
	"time"
)

// ledgers are the tables of signed counts (migration 0040) with their keys.
// Transactions only ever add rows to them; compaction folds each into one
// row per key, so a page adds up about as many rows as there are keys.
var ledgers = []struct {
	table string
	keys  []string
}{
	{"enrolment_counts", []string{"site_id", "enrolled_on", "withdrawn_on"}},
	{"case_counts", []string{"state", "owned", "due_hour"}},
	{"figure_box_counts", []string{"protocol_id", "site_id", "enrolled_on", "withdrawn", "box", "exit"}},
	{"figure_week_counts", []string{"protocol_id", "enrolled_on", "withdrawn_on", "week"}},
	{"figure_stage_counts", []string{"protocol_id", "site_id", "sex", "age_band", "stage", "settled", "uninterpretable"}},
	{"figure_time_counts", []string{"protocol_id", "site_id", "sex", "age_band", "event", "closed", "days", "flag_day"}},
	{"figure_kappa_counts", []string{"protocol_id", "site_id", "auto", "rhythm"}},
	{"figure_unread_counts", nil},
	{"protocol_result_counts", []string{"protocol_id"}},
	{"message_status_counts", []string{"status"}},
}

// CompactLedgers folds every ledger into one row per key, dropping keys whose
// counts add up to zero. It runs beside the transactions that add rows:
// each ledger is folded in one statement, which deletes the rows it saw and
// writes their sums, so rows added meanwhile stay as they are and no count
// is lost or counted twice.
func (s *Store) CompactLedgers(ctx context.Context) error {
	for _, l := range ledgers {
		keys := strings.Join(l.keys, ", ")
		group := ""
		if keys != "" {
			group = " GROUP BY " + keys
			keys += ", "
		}
		q := fmt.Sprintf(`WITH gone AS (DELETE FROM %s RETURNING *)
			INSERT INTO %s (%sn) SELECT %ssum(n) FROM gone%s HAVING sum(n) <> 0`, l.table, l.table, keys, keys, group)
		if _, err := s.pool.Exec(ctx, q); err != nil {
			return mapErr("compact "+l.table, err)
		}
	}
	return nil
}

// KeepFigures computes, until ctx ends, the kept figures that changes made
// outside the store's transactions left waiting (DrainFigures), checking
// every interval, and folds the ledgers now and then (CompactLedgers). The
// server runs it in the background.
func (s *Store) KeepFigures(ctx context.Context, every time.Duration, log *slog.Logger) {
	t := time.NewTicker(every)
	defer t.Stop()
	lastCompact := time.Now()
	for {
		select {
		case <-ctx.Done():
			return
		case <-t.C:
		}
		for ctx.Err() == nil {
			n, err := s.DrainFigures(ctx, 1000)
			if err != nil {
				if ctx.Err() == nil {
					log.Warn("keep figures", "err", err)
				}
				break
			}
			if n == 0 {
				break
			}
			log.Debug("kept figures computed", "participants", n)
		}
		if time.Since(lastCompact) >= 30*every {
			lastCompact = time.Now()
			if err := s.CompactLedgers(ctx); err != nil && ctx.Err() == nil {
				log.Warn("compact ledgers", "err", err)
			}
		}
	}
}
