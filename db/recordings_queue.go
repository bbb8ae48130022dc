package db

import (
	"context"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/overread"

	"github.com/jackc/pgx/v5"
)

// QueueRecording is a recording on the confirmations page.
type QueueRecording struct {
	ID         int64
	CaseID     int64
	StudyID    string
	SiteCode   string
	TakenAt    time.Time
	ReceivedAt time.Time
	DurationS  float64
	TooShort   bool
	Auto       overread.Auto
	Readings   []OverRead // the first and second readings of a disagreement
}

// RecentOverRead is an entered reading on the confirmations page.
type RecentOverRead struct {
	OverRead
	RecordingID int64
	CaseID      int64
	StudyID     string
	SiteCode    string
	TooShort    bool
}

// Confirmations are the over-read work lists: recordings without any
// reading (oldest arrival first), disagreements waiting for adjudication
// (oldest first), and the latest readings, newest reading day first (a
// reading entered late sits among the readings of its day).
type Confirmations struct {
	// Unread are the recordings waiting for an over-read (overread.Awaits),
	// at most the limit; UnreadCount counts them all.
	Unread      []QueueRecording
	UnreadCount int
	Disagreed   []QueueRecording
	Recent      []RecentOverRead
}

// Confirmations reads the work lists, at most limit rows each.
func (s *Store) Confirmations(ctx context.Context, limit int) (Confirmations, error) {
	if limit <= 0 || limit > 1000 {
		limit = 100
	}
	var out Confirmations
	err := s.readTx(ctx, func(tx pgx.Tx) error {
		scan := func(r pgx.CollectableRow) (QueueRecording, error) {
			var q QueueRecording
			var dur float32
			var auto string
			err := r.Scan(&q.ID, &q.CaseID, &q.StudyID, &q.SiteCode, &q.TakenAt, &q.ReceivedAt, &dur, &q.TooShort, &auto)
			q.DurationS, q.Auto = float64(dur), overread.Auto(auto)
			return q, err
		}
		const cols = `r.id, r.case_id, p.study_id, st.code, r.taken_at, r.received_at, r.duration_s, r.too_short, r.auto_interpretation`
		rows, err := tx.Query(ctx, `SELECT `+cols+` FROM `+recordingFrom+`
			WHERE `+awaitingRead+`
			ORDER BY r.received_at, r.id LIMIT $1`, limit)
		if err != nil {
			return err
		}
		if out.Unread, err = pgx.CollectRows(rows, scan); err != nil {
			return err
		}
		if out.UnreadCount, err = keptAwaitingRead(ctx, tx); err != nil {
			return err
		}
		// Candidates: a second reading and no adjudication, on a case still
		// worked. Whether they disagree is overread's rule, applied below.
		rows, err = tx.Query(ctx, `SELECT `+cols+` FROM `+recordingFrom+`
			WHERE c.closed_at IS NULL AND EXISTS (SELECT 1 FROM over_reads o WHERE o.recording_id = r.id AND o.role = 'second')
			  AND NOT EXISTS (SELECT 1 FROM over_reads o WHERE o.recording_id = r.id AND o.role = 'adjudication')
			ORDER BY r.received_at, r.id`)
		if err != nil {
			return err
		}
		cands, err := pgx.CollectRows(rows, scan)
		if err != nil {
			return err
		}
		ids := make([]int64, len(cands))
		for i, c := range cands {
			ids[i] = c.ID
		}
		by, err := readingsOf(ctx, tx, ids)
		if err != nil {
			return err
		}
		for _, c := range cands {
			v, err := conclusionOf(c.ID, by[c.ID])
			if err != nil {
				return err
			}
			if v.Status == overread.Disagreed && len(out.Disagreed) < limit {
				c.Readings = by[c.ID]
				out.Disagreed = append(out.Disagreed, c)
			}
		}
		rows, err = tx.Query(ctx, `
			SELECT o.id, o.role, o.rhythm, o.confidence, coalesce(o.reader_id, 0), o.reader, o.read_on, o.comment, o.created_by, o.created_at,
			       r.id, r.case_id, p.study_id, st.code, r.too_short
			FROM over_reads o JOIN recordings r ON r.id = o.recording_id
			  JOIN participants p ON p.id = r.participant_id JOIN sites st ON st.id = p.site_id
			ORDER BY o.read_on DESC, o.created_at DESC, o.id DESC LIMIT $1`, limit)
		if err != nil {
			return err
		}
		out.Recent, err = pgx.CollectRows(rows, func(r pgx.CollectableRow) (RecentOverRead, error) {
			var o RecentOverRead
			var role, rhythm, conf string
			var on time.Time
			err := r.Scan(&o.ID, &role, &rhythm, &conf, &o.ReaderID, &o.Reader, &on, &o.Comment, &o.CreatedBy, &o.CreatedAt,
				&o.RecordingID, &o.CaseID, &o.StudyID, &o.SiteCode, &o.TooShort)
			o.Role, o.Rhythm, o.Confidence, o.On = overread.Role(role), overread.Rhythm(rhythm), overread.Confidence(conf), cohort.DateOf(on)
			return o, err
		})
		return err
	})
	return out, mapErr("confirmations", err)
}
