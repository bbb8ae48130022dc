package db

import (
	"context"
	"fmt"
	"slices"
	"strconv"
	"strings"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"

	"github.com/jackc/pgx/v5"
)

// syncLockKey is the advisory lock that makes case syncs take turns: two runs
// reading the same positive weeks at once could both open a case for them.
// The value is arbitrary; it only has to differ from other advisory locks.
const syncLockKey = 0x63617365 // "case"

// weekKey is the identity of a screening result behind a positive week.
func weekKey(protocolID, week int) string { return strconv.Itoa(protocolID) + ":" + strconv.Itoa(week) }

func parseWeekKey(k string) (protocolID, week int, err error) {
	p, w, ok := strings.Cut(k, ":")
	if !ok {
		return 0, 0, fmt.Errorf("db: week key %q", k)
	}
	if protocolID, err = strconv.Atoi(p); err != nil {
		return 0, 0, fmt.Errorf("db: week key %q: %w", k, err)
	}
	if week, err = strconv.Atoi(w); err != nil {
		return 0, 0, fmt.Errorf("db: week key %q: %w", k, err)
	}
	return protocolID, week, nil
}

// SyncCases brings the cases in line with the screen-positive results of one
// protocol version: positive weeks that extend a case still being worked are
// added to it, weeks near a closed case are recorded on it without reopening
// it, and the rest open new cases, one per episode (followup.AssignToCases,
// with the study's episode gap). participantIDs limits the work to those
// participants; nil means every participant with a positive result.
//
// It is idempotent: a result already on a case is left alone, so the
// screening job can call it after every run. Runs take turns under an
// advisory lock, and everything of one call commits together, audited as the
// actor. Withdrawn participants get no new case. It returns how many cases
// were opened and how many were extended.
//
// Existing cases of every protocol version take part in the merge, so
// re-screening the same weeks with a new version does not open a second case
// for an episode that is already followed up.
func (s *Store) SyncCases(ctx context.Context, a cohort.Actor, protocolID int, participantIDs []int64) (opened, extended int, err error) {
	err = s.inTx(ctx, func(tx pgx.Tx) error {
		opened, extended = 0, 0
		if _, err := tx.Exec(ctx, `SELECT pg_advisory_xact_lock($1)`, syncLockKey); err != nil {
			return err
		}
		var exists bool
		if err := tx.QueryRow(ctx, `SELECT EXISTS (SELECT 1 FROM protocols WHERE id = $1)`, protocolID).Scan(&exists); err != nil {
			return err
		}
		if !exists {
			return fmt.Errorf("protocol %d: %w", protocolID, cohort.ErrNotFound)
		}
		st, err := studySettings(ctx, tx)
		if err != nil {
			return err
		}
		positives, err := positiveWeeks(ctx, tx, protocolID, participantIDs)
		if err != nil {
			return err
		}
		if len(positives) == 0 {
			return nil
		}
		pids := make([]int64, 0, len(positives))
		for pid := range positives {
			pids = append(pids, pid)
		}
		slices.Sort(pids)
		existing, err := casesWithWeeks(ctx, tx, pids)
		if err != nil {
			return err
		}
		now := s.now()
		for _, pid := range pids {
			asg, err := followup.AssignToCases(existing[pid], positives[pid], st.EpisodeGapWeeks)
			if err != nil {
				return fmt.Errorf("participant %d: %w", pid, err)
			}
			for _, add := range asg.Extend {
				if err := s.addWeeks(ctx, tx, a, pid, add, false); err != nil {
					return err
				}
				extended++
			}
			for _, add := range asg.Late {
				if err := s.addWeeks(ctx, tx, a, pid, add, true); err != nil {
					return err
				}
			}
			for _, ep := range asg.New {
				if err := s.openCase(ctx, tx, a, pid, protocolID, ep, st, now); err != nil {
					return err
				}
				opened++
			}
		}
		return nil
	})
	if err != nil {
		return 0, 0, mapErr("sync cases", err)
	}
	return opened, extended, nil
}

// positiveWeeks reads the positive results of a protocol by participant,
// leaving out withdrawn participants.
func positiveWeeks(ctx context.Context, tx pgx.Tx, protocolID int, participantIDs []int64) (map[int64][]followup.PositiveWeek, error) {
	q := `SELECT sr.participant_id, sr.week FROM screen_results sr JOIN participants p ON p.id = sr.participant_id
		WHERE sr.protocol_id = $1 AND sr.verdict = 'positive' AND p.withdrawn_on IS NULL`
	args := []any{protocolID}
	if participantIDs != nil {
		q += ` AND sr.participant_id = ANY($2)`
		args = append(args, participantIDs)
	}
	rows, err := tx.Query(ctx, q+` ORDER BY 1, 2`, args...)
	if err != nil {
		return nil, err
	}
	defer rows.Close()
	out := map[int64][]followup.PositiveWeek{}
	for rows.Next() {
		var pid int64
		var week int16
		if err := rows.Scan(&pid, &week); err != nil {
			return nil, err
		}
		out[pid] = append(out[pid], followup.PositiveWeek{Week: int(week), Key: weekKey(protocolID, int(week))})
	}
	return out, rows.Err()
}

// casesWithWeeks reads the participants' cases with the weeks on them and
// locks the case rows, in id order like every other multi-case edit.
func casesWithWeeks(ctx context.Context, tx pgx.Tx, pids []int64) (map[int64][]followup.CaseWeeks, error) {
	rows, err := tx.Query(ctx, `
		SELECT c.id, c.participant_id, c.state, cw.protocol_id, cw.week
		FROM cases c JOIN case_weeks cw ON cw.case_id = c.id
		WHERE c.participant_id = ANY($1)
		ORDER BY c.id, cw.week, cw.protocol_id
		FOR UPDATE OF c`, pids)
	if err != nil {
		return nil, err
	}
	defer rows.Close()
	out := map[int64][]followup.CaseWeeks{}
	for rows.Next() {
		var id, pid int64
		var state string
		var proto int
		var week int16
		if err := rows.Scan(&id, &pid, &state, &proto, &week); err != nil {
			return nil, err
		}
		cs := out[pid]
		sid := strconv.FormatInt(id, 10)
		if len(cs) == 0 || cs[len(cs)-1].ID != sid {
			cs = append(cs, followup.CaseWeeks{ID: sid, State: followup.State(state)})
		}
		last := &cs[len(cs)-1]
		last.Weeks = append(last.Weeks, followup.PositiveWeek{Week: int(week), Key: weekKey(proto, int(week))})
		out[pid] = cs
	}
	return out, rows.Err()
}

func insertWeeks(ctx context.Context, tx pgx.Tx, pid, caseID int64, weeks []followup.PositiveWeek, late bool) ([]int, error) {
	var nums []int
	for _, w := range weeks {
		proto, week, err := parseWeekKey(w.Key)
		if err != nil {
			return nil, err
		}
		if _, err := tx.Exec(ctx, `INSERT INTO case_weeks (participant_id, protocol_id, week, case_id, late) VALUES ($1, $2, $3, $4, $5)`,
			pid, proto, week, caseID, late); err != nil {
			return nil, err
		}
		nums = append(nums, week)
	}
	return nums, nil
}

// addWeeks attaches weeks to an existing case. Weeks that extend a case being
// worked widen its span; late weeks on a closed case do not (its episode has
// been dealt with). The version stays: weeks are not something a person edits,
// so adding them must not refuse an edit in progress.
func (s *Store) addWeeks(ctx context.Context, tx pgx.Tx, a cohort.Actor, pid int64, add followup.Addition, late bool) error {
	id, err := strconv.ParseInt(add.CaseID, 10, 64)
	if err != nil {
		return fmt.Errorf("case id %q: %w", add.CaseID, err)
	}
	cur, err := lockCase(ctx, tx, id)
	if err != nil {
		return err
	}
	nums, err := insertWeeks(ctx, tx, pid, id, add.Weeks, late)
	if err != nil {
		return err
	}
	next := cur
	action := followup.EditLateWeeks
	if !late {
		action = followup.EditExtend
		for _, w := range nums {
			next.FirstWeek, next.LastWeek = min(next.FirstWeek, w), max(next.LastWeek, w)
		}
		if _, err := tx.Exec(ctx, `UPDATE cases SET first_week = $2, last_week = $3, updated_at = now() WHERE id = $1`,
			id, next.FirstWeek, next.LastWeek); err != nil {
			return err
		}
	}
	nw := snapshotOf(next)
	nw.WeeksAdded = nums
	return audit(ctx, tx, a, string(action), "case", add.CaseID, snapshotOf(cur), nw)
}

// openCase opens a case for a new episode, flagged now, and schedules its
// first contact.
func (s *Store) openCase(ctx context.Context, tx pgx.Tx, a cohort.Actor, pid int64, protocolID int, ep followup.Episode, st StudySettings, now time.Time) error {
	c := Case{ParticipantID: pid, ProtocolID: protocolID, FirstWeek: ep.First, LastWeek: ep.Last, State: followup.Open, FlaggedAt: now, Version: 1}
	schedule(&c, nil, st)
	err := tx.QueryRow(ctx, `
		INSERT INTO cases (participant_id, protocol_id, first_week, last_week, state, flagged_at, next_action, due_at)
		VALUES ($1, $2, $3, $4, 'open', $5, $6, $7) RETURNING id`,
		pid, protocolID, ep.First, ep.Last, now, string(c.NextAction), timeArg(c.DueAt)).Scan(&c.ID)
	if err != nil {
		return err
	}
	if err := tx.QueryRow(ctx, `SELECT study_id FROM participants WHERE id = $1`, pid).Scan(&c.StudyID); err != nil {
		return err
	}
	nums, err := insertWeeks(ctx, tx, pid, c.ID, ep.Weeks, false)
	if err != nil {
		return err
	}
	snap := snapshotOf(c)
	snap.WeeksAdded = nums
	return audit(ctx, tx, a, string(followup.EditOpen), "case", strconv.FormatInt(c.ID, 10), nil, snap)
}

// CaseSync is the after-screen hook that opens and extends follow-up cases
// from the results of the active protocol, as the system.
func CaseSync(s *Store) AfterScreen {
	return func(ctx context.Context, protocolID int, participantIDs []int64) error {
		_, _, err := s.SyncCases(ctx, cohort.System, protocolID, participantIDs)
		return err
	}
}
