package db

// The definitions of the figures several pages show, each in one place, so
// a figure means the same on every page and in every file (issue 19). The
// rule itself is written in cohort/ (cohort.StatusOf, overread.Awaits); here
// is its SQL, used by every query that counts or lists by it, and a test
// (definitions_test.go) holds each SQL to its rule. The screening cascade
// and the agreement figures have their own single path (figures.go).

import (
	"context"
	"fmt"
	"strconv"
	"strings"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/overread"

	"github.com/jackc/pgx/v5"
)

// awaitingRead is overread.Awaits in SQL, over a recording r joined to its
// case c: no current reading, the case still worked, not marked as needing
// no read.
const awaitingRead = `(NOT EXISTS (SELECT 1 FROM over_reads o WHERE o.recording_id = r.id)
	AND r.read_not_needed_at IS NULL AND c.closed_at IS NULL)`

// participantStatus is cohort.StatusOf in SQL, over a participant p: today is
// the placeholder of the day (a date, in the study's zone) and weeks that of
// the study's weeks of follow-up.
func participantStatus(today, weeks string) string {
	return fmt.Sprintf(`(CASE WHEN p.withdrawn_on IS NOT NULL THEN '%[1]s'
		WHEN %[4]s::int > 0 AND %[5]s::date >= p.enrolled_on + 7 * %[4]s::int THEN '%[2]s' ELSE '%[3]s' END)`,
		cohort.StatusWithdrawn, cohort.StatusCompleted, cohort.StatusActive, weeks, today)
}

// participantsByStatus counts the participants p matching where (with its
// args) by their status on the day today, for the study's weeks of
// follow-up: the one count of participants by status (the start page, the
// participants list).
func participantsByStatus(ctx context.Context, q querier, where string, args []any, today cohort.Date, weeks int) (map[cohort.ParticipantStatus]int64, int64, error) {
	return countByStatus(ctx, q, "participants p", "count(*)", where, args, today, weeks)
}

// keptByStatus is participantsByStatus from the enrolment counts kept by
// site, enrolment day and withdrawal day (enrolment_counts, migration 0040),
// which carry the columns the rule reads: one read whatever the study's
// size. where may name p.site_id, p.enrolled_on and p.withdrawn_on.
func keptByStatus(ctx context.Context, q querier, where string, args []any, today cohort.Date, weeks int) (map[cohort.ParticipantStatus]int64, int64, error) {
	return countByStatus(ctx, q, "enrolment_counts p", "sum(p.n)", where, args, today, weeks)
}

// countByStatus counts the rows of from (a relation named p) matching where
// by participantStatus, adding up count.
func countByStatus(ctx context.Context, q querier, from, count, where string, args []any, today cohort.Date, weeks int) (map[cohort.ParticipantStatus]int64, int64, error) {
	n := len(args)
	rows, err := q.Query(ctx, fmt.Sprintf(`SELECT %s, %s FROM %s WHERE %s GROUP BY 1`,
		participantStatus(fmt.Sprintf("$%d", n+1), fmt.Sprintf("$%d", n+2)), count, from, where), append(args[:n:n], today.String(), weeks)...)
	if err != nil {
		return nil, 0, err
	}
	defer rows.Close()
	out, total := map[cohort.ParticipantStatus]int64{}, int64(0)
	for rows.Next() {
		var st string
		var k int64
		if err := rows.Scan(&st, &k); err != nil {
			return nil, 0, err
		}
		if k != 0 {
			out[cohort.ParticipantStatus(st)] = k
		}
		total += k
	}
	return out, total, rows.Err()
}

// statusDay is the day and the weeks of follow-up participantStatus counts
// with: today in the study's zone.
func (s *Store) statusDay(ctx context.Context) (cohort.Date, int, error) {
	st, err := s.StudySettings(ctx)
	if err != nil {
		return cohort.Date{}, 0, err
	}
	return cohort.DateOf(s.now().In(st.Location())), st.FollowUpWeeks, nil
}

// RecordingsAwaitingRead counts the recordings waiting for an over-read
// (overread.Awaits): the figure of the start page, triage, the recording
// page and the confirmations page. It is read from the kept sum
// (figure_unread_counts, kept in the transaction of every change through
// the store), so its cost does not grow with the study; rows loaded by bare
// SQL count once the background pass has taken them in.
func (s *Store) RecordingsAwaitingRead(ctx context.Context) (int, error) {
	n, err := keptAwaitingRead(ctx, s.reader(ctx))
	return n, mapErr("recordings awaiting a read", err)
}

func keptAwaitingRead(ctx context.Context, q querier) (int, error) {
	var n int
	err := q.QueryRow(ctx, `SELECT coalesce(sum(n), 0) FROM figure_unread_counts`).Scan(&n)
	return n, err
}

// NextAwaitingRead is the recording an investigator reads next after the
// recording after (0: the first): the oldest arrival waiting for an
// over-read, other than after. ok is false when none is waiting.
func (s *Store) NextAwaitingRead(ctx context.Context, after int64) (int64, bool, error) {
	var id int64
	err := s.pool.QueryRow(ctx, `SELECT r.id FROM recordings r JOIN cases c ON c.id = r.case_id
		WHERE `+awaitingRead+` AND r.id <> $1 ORDER BY r.received_at, r.id LIMIT 1`, after).Scan(&id)
	if err == pgx.ErrNoRows {
		return 0, false, nil
	}
	if err != nil {
		return 0, false, mapErr("next recording awaiting a read", err)
	}
	return id, true, nil
}

// MarkReadNotNeeded records that a recording waiting for an over-read needs
// none, with the reason (a repeat recording replaced it, say): it leaves
// the over-read queue. Audited. Refused: a recording that has a reading or
// is already marked, a reason that is empty or over
// overread.MaxReasonChars.
func (s *Store) MarkReadNotNeeded(ctx context.Context, a cohort.Actor, recordingID int64, reason string) error {
	reason = strings.TrimSpace(reason)
	var ve cohort.ValidationError
	switch {
	case reason == "":
		ve.Add("not_needed_reason", "say why this recording needs no over-read")
	case len(reason) > overread.MaxReasonChars:
		ve.Add("not_needed_reason", fmt.Sprintf("use at most %d characters", overread.MaxReasonChars))
	}
	if err := ve.Err(); err != nil {
		return err
	}
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		var read bool
		var marked *time.Time
		if err := tx.QueryRow(ctx, `SELECT EXISTS (SELECT 1 FROM over_reads o WHERE o.recording_id = r.id), r.read_not_needed_at
			FROM recordings r WHERE r.id = $1 FOR UPDATE`, recordingID).Scan(&read, &marked); err != nil {
			return err
		}
		switch {
		case read:
			return &cohort.ValidationError{Fields: map[string]string{"not_needed_reason": "the recording has a reading already"}}
		case marked != nil:
			return &cohort.PublicError{Message: "The recording is already marked as needing no over-read.", Kind: cohort.ErrConflict}
		}
		if _, err := tx.Exec(ctx, `UPDATE recordings SET read_not_needed_reason = $2, read_not_needed_by = $3, read_not_needed_at = $4 WHERE id = $1`,
			recordingID, reason, a.Label(), s.now()); err != nil {
			return err
		}
		return audit(ctx, tx, a, "recording.read_not_needed", "recording", strconv.FormatInt(recordingID, 10), nil, map[string]any{"reason": reason})
	})
	return mapErr("mark recording as needing no read", err)
}
