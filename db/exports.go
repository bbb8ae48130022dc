package db

import (
	"context"
	"encoding/json"
	"fmt"
	"strconv"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/deid"
	"cohortdesk/cohort/screen"

	"github.com/jackc/pgx/v5"
)

// The readers below stream the dataset export's records, identified as
// stored; package deid turns each into a de-identified row. Free text
// (notes, closing reasons, comments, withdrawal reasons), names of staff and
// participants, contact details, serials and tracking numbers are not read.

// EachExportParticipant streams every participant, by study ID.
func (s *Store) EachExportParticipant(ctx context.Context, fn func(deid.ParticipantRecord) error) error {
	rows, err := s.pool.Query(ctx, `
		SELECT p.study_id, st.code, p.sex, p.age_at_enrolment, coalesce(pi.zip, ''), p.enrolled_on, p.withdrawn_on, p.rr_capable,
		       p.hypertension, p.diabetes, p.heart_failure, p.prior_stroke, p.vascular_disease
		FROM participants p JOIN sites st ON st.id = p.site_id
		LEFT JOIN participant_identity pi ON pi.participant_id = p.id
		ORDER BY p.study_id`)
	if err != nil {
		return mapErr("export participants", err)
	}
	defer rows.Close()
	for rows.Next() {
		var r deid.ParticipantRecord
		var sex string
		var age *int16
		var enrolled time.Time
		var withdrawn *time.Time
		if err := rows.Scan(&r.StudyID, &r.SiteCode, &sex, &age, &r.ZIP, &enrolled, &withdrawn, &r.RRCapable,
			&r.Hypertension, &r.Diabetes, &r.HeartFailure, &r.PriorStroke, &r.VascularDisease); err != nil {
			return mapErr("export participants", err)
		}
		r.Sex, r.EnrolledOn = cohort.Sex(sex), cohort.DateOf(enrolled)
		if age != nil {
			a := int(*age)
			r.AgeAtEnrolment = &a
		}
		if withdrawn != nil {
			d := cohort.DateOf(*withdrawn)
			r.WithdrawnOn = &d
		}
		if err := fn(r); err != nil {
			return err
		}
	}
	return mapErr("export participants", rows.Err())
}

// EachExportWeek streams the stored participant-weeks with their reading
// counts.
func (s *Store) EachExportWeek(ctx context.Context, fn func(deid.WeekRecord) error) error {
	rows, err := s.pool.Query(ctx, `
		SELECT p.study_id, w.week,
		       coalesce(sum(w.n) FILTER (WHERE w.kind = 1), 0), coalesce(sum(w.n) FILTER (WHERE w.kind = 2), 0),
		       coalesce(sum(w.n) FILTER (WHERE w.kind = 3), 0)
		FROM wear_weeks w JOIN participants p ON p.id = w.participant_id
		GROUP BY p.study_id, w.week ORDER BY p.study_id, w.week`)
	if err != nil {
		return mapErr("export weeks", err)
	}
	defer rows.Close()
	for rows.Next() {
		var r deid.WeekRecord
		var week int16
		if err := rows.Scan(&r.StudyID, &week, &r.HR, &r.Steps, &r.RR); err != nil {
			return mapErr("export weeks", err)
		}
		r.Week = int(week)
		if err := fn(r); err != nil {
			return err
		}
	}
	return mapErr("export weeks", rows.Err())
}

// EachExportScreen streams every screening result with its window figures.
// The result's input digest and reason stay inside.
func (s *Store) EachExportScreen(ctx context.Context, fn func(deid.ScreenRecord) error) error {
	rows, err := s.pool.Query(ctx, `
		SELECT p.study_id, sr.week, sr.protocol_id, pr.version, sr.verdict, sr.wear_hours, sr.result
		FROM screen_results sr JOIN participants p ON p.id = sr.participant_id JOIN protocols pr ON pr.id = sr.protocol_id
		ORDER BY p.study_id, sr.week, sr.protocol_id`)
	if err != nil {
		return mapErr("export screen results", err)
	}
	defer rows.Close()
	for rows.Next() {
		var r deid.ScreenRecord
		var week int16
		var hours float32
		var raw []byte
		if err := rows.Scan(&r.StudyID, &week, &r.ProtocolID, &r.ProtocolVersion, &r.Verdict, &hours, &raw); err != nil {
			return mapErr("export screen results", err)
		}
		r.Week, r.WearHours = int(week), float64(hours)
		var res screen.Result
		if json.Unmarshal(raw, &res) == nil {
			for _, w := range res.Windows {
				r.Windows = append(r.Windows, deid.WindowRecord{Minutes: w.Minutes, Usable: w.Usable, Irregular: w.Irregular,
					LongestRun: w.LongestRun, Share: w.Share, MeanMASD: w.MeanMASD})
			}
			if res.RR != nil {
				r.RRRan, r.RRSegments, r.RRAFLike = true, res.RR.Segments, res.RR.AFLike
			}
		}
		if err := fn(r); err != nil {
			return err
		}
	}
	return mapErr("export screen results", rows.Err())
}

// EachExportCase streams every case, numbered within its participant by
// first week. Notes, closing reasons, owners and tracking numbers are not
// read.
func (s *Store) EachExportCase(ctx context.Context, fn func(deid.CaseRecord) error) error {
	rows, err := s.pool.Query(ctx, `
		SELECT p.study_id, p.enrolled_on, p.time_zone,
		       row_number() OVER (PARTITION BY c.participant_id ORDER BY c.first_week, c.id),
		       c.protocol_id, c.first_week, c.last_week, c.state, c.flagged_at, c.reached_at, c.recorder_sent_at,
		       c.recording_back_at, c.over_read_at, c.closed_at,
		       (SELECT count(*) FROM contact_attempts a WHERE a.case_id = c.id)
		FROM cases c JOIN participants p ON p.id = c.participant_id
		ORDER BY p.study_id, c.first_week, c.id`)
	if err != nil {
		return mapErr("export cases", err)
	}
	defer rows.Close()
	locs := zoneCache{}
	for rows.Next() {
		var r deid.CaseRecord
		var enrolled time.Time
		var zone string
		var fw, lw int16
		var reached, sent, back, read, closed *time.Time
		var n int64
		if err := rows.Scan(&r.StudyID, &enrolled, &zone, &n, &r.ProtocolID, &fw, &lw, &r.State, &r.FlaggedAt, &reached, &sent,
			&back, &read, &closed, &r.Attempts); err != nil {
			return mapErr("export cases", err)
		}
		r.EnrolledOn, r.Location, r.Number = cohort.DateOf(enrolled), locs.get(zone), int(n)
		r.FirstWeek, r.LastWeek = int(fw), int(lw)
		r.ReachedAt, r.RecorderSentAt, r.RecordingBackAt = timeOf(reached), timeOf(sent), timeOf(back)
		r.OverReadAt, r.ClosedAt = timeOf(read), timeOf(closed)
		if err := fn(r); err != nil {
			return err
		}
	}
	return mapErr("export cases", rows.Err())
}

// EachExportOverRead streams every over-read with its recording, numbered
// like EachExportCase's cases. Comments and readers are not read.
func (s *Store) EachExportOverRead(ctx context.Context, fn func(deid.OverReadRecord) error) error {
	rows, err := s.pool.Query(ctx, `
		WITH cn AS (
		    SELECT id, row_number() OVER (PARTITION BY participant_id ORDER BY first_week, id) AS n FROM cases
		), rn AS (
		    SELECT id, row_number() OVER (PARTITION BY case_id ORDER BY taken_at, id) AS n FROM recordings
		)
		SELECT p.study_id, p.enrolled_on, p.time_zone, cn.n, rn.n, r.taken_at, r.duration_s, r.auto_interpretation,
		       o.role, o.rhythm, o.confidence, o.read_on
		FROM over_reads o JOIN recordings r ON r.id = o.recording_id
		JOIN participants p ON p.id = r.participant_id
		JOIN cn ON cn.id = r.case_id JOIN rn ON rn.id = r.id
		ORDER BY p.study_id, cn.n, rn.n, o.role`)
	if err != nil {
		return mapErr("export over-reads", err)
	}
	defer rows.Close()
	locs := zoneCache{}
	for rows.Next() {
		var r deid.OverReadRecord
		var enrolled, readOn time.Time
		var zone string
		var cn, rn int64
		var dur float32
		if err := rows.Scan(&r.StudyID, &enrolled, &zone, &cn, &rn, &r.TakenAt, &dur, &r.AutoInterpretation,
			&r.Role, &r.Rhythm, &r.Confidence, &readOn); err != nil {
			return mapErr("export over-reads", err)
		}
		r.EnrolledOn, r.Location, r.ReadOn = cohort.DateOf(enrolled), locs.get(zone), cohort.DateOf(readOn)
		r.CaseNumber, r.RecordingNumber, r.DurationS = int(cn), int(rn), float64(dur)
		if err := fn(r); err != nil {
			return err
		}
	}
	return mapErr("export over-reads", rows.Err())
}

// zoneCache loads each time zone once per export.
type zoneCache map[string]*time.Location

func (z zoneCache) get(name string) *time.Location {
	if l, ok := z[name]; ok {
		return l
	}
	l, err := time.LoadLocation(name)
	if err != nil {
		l = time.UTC
	}
	z[name] = l
	return l
}

// Export is a de-identified file handed out, as recorded.
type Export struct {
	ID        int64
	Kind      string // dataset or referral_batch
	FileName  string
	Bytes     int64
	SHA256    string
	Manifest  json.RawMessage
	Actor     string
	CreatedAt time.Time
}

// Export kinds as stored.
const (
	ExportDataset       = "dataset"
	ExportReferralBatch = "referral_batch"
)

// RecordExport records a file handed out and audits it, returning its id.
func (s *Store) RecordExport(ctx context.Context, a cohort.Actor, e Export) (Export, error) {
	if e.Kind != ExportDataset && e.Kind != ExportReferralBatch {
		return Export{}, fmt.Errorf("db: record export: kind %q unknown", e.Kind)
	}
	e.Actor = a.Label()
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		if err := tx.QueryRow(ctx, `
			INSERT INTO exports (kind, file_name, bytes, sha256, manifest, actor_id, actor, created_at)
			VALUES ($1, $2, $3, $4, $5, $6, $7, $8) RETURNING id, created_at`,
			e.Kind, e.FileName, e.Bytes, e.SHA256, []byte(e.Manifest), actorID(a), e.Actor, s.now()).Scan(&e.ID, &e.CreatedAt); err != nil {
			return err
		}
		return audit(ctx, tx, a, "export."+e.Kind, "export", strconv.FormatInt(e.ID, 10), nil,
			map[string]any{"file_name": e.FileName, "bytes": e.Bytes, "sha256": e.SHA256, "manifest": e.Manifest})
	})
	return e, mapErr("record export", err)
}

// Exports lists recorded exports, newest first.
func (s *Store) Exports(ctx context.Context, limit int) ([]Export, error) {
	if limit <= 0 || limit > 1000 {
		limit = 100
	}
	rows, err := s.pool.Query(ctx, `SELECT id, kind, file_name, bytes, sha256, manifest, actor, created_at
		FROM exports ORDER BY created_at DESC, id DESC LIMIT $1`, limit)
	if err != nil {
		return nil, mapErr("exports", err)
	}
	out, err := pgx.CollectRows(rows, func(r pgx.CollectableRow) (Export, error) {
		var e Export
		err := r.Scan(&e.ID, &e.Kind, &e.FileName, &e.Bytes, &e.SHA256, &e.Manifest, &e.Actor, &e.CreatedAt)
		return e, err
	})
	return out, mapErr("exports", err)
}
