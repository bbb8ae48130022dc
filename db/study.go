package db

import (
	"context"
	"encoding/json"
	"fmt"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"

	"github.com/jackc/pgx/v5"
)

// StudySettings are the study-wide settings an administrator edits
// (followup.StudySettings: their rules live beside the follow-up rules that
// read them). The follow-up settings are stored in the study row's
// service_levels JSON (the fields of followup.ServiceLevels plus the episode
// gap), so adding one needs no schema change.
type StudySettings = followup.StudySettings

// serviceJSON is the stored shape of the follow-up settings. Pointers tell a
// missing key (take the default) from a zero.
type serviceJSON struct {
	FirstContactWorkingDays *int `json:"first_contact_working_days,omitempty"`
	MaxAttempts             *int `json:"max_attempts,omitempty"`
	GiveUpAfterDays         *int `json:"give_up_after_days,omitempty"`
	RecorderSendWithinDays  *int `json:"recorder_send_within_days,omitempty"`
	RecordingBackWithinDays *int `json:"recording_back_within_days,omitempty"`
	OverReadWithinDays      *int `json:"over_read_within_days,omitempty"`
	ReferOrCloseWithinDays  *int `json:"refer_or_close_within_days,omitempty"`
	EpisodeGapWeeks         *int `json:"episode_gap_weeks,omitempty"`
}

func decodeService(raw []byte, st *StudySettings) error {
	var j serviceJSON
	if len(raw) > 0 {
		if err := json.Unmarshal(raw, &j); err != nil {
			return fmt.Errorf("db: study service levels: %w", err)
		}
	}
	set := func(dst *int, v *int) {
		if v != nil {
			*dst = *v
		}
	}
	set(&st.Service.FirstContactWorkingDays, j.FirstContactWorkingDays)
	set(&st.Service.MaxAttempts, j.MaxAttempts)
	set(&st.Service.GiveUpAfterDays, j.GiveUpAfterDays)
	set(&st.Service.RecorderSendWithinDays, j.RecorderSendWithinDays)
	set(&st.Service.RecordingBackWithinDays, j.RecordingBackWithinDays)
	set(&st.Service.OverReadWithinDays, j.OverReadWithinDays)
	set(&st.Service.ReferOrCloseWithinDays, j.ReferOrCloseWithinDays)
	set(&st.EpisodeGapWeeks, j.EpisodeGapWeeks)
	return nil
}

func encodeService(st StudySettings) serviceJSON {
	sl := st.Service
	return serviceJSON{&sl.FirstContactWorkingDays, &sl.MaxAttempts, &sl.GiveUpAfterDays, &sl.RecorderSendWithinDays,
		&sl.RecordingBackWithinDays, &sl.OverReadWithinDays, &sl.ReferOrCloseWithinDays, &st.EpisodeGapWeeks}
}

// rowQuerier is a transaction or the pool.
type rowQuerier interface {
	QueryRow(ctx context.Context, sql string, args ...any) pgx.Row
}

// studySettings reads the settings inside a transaction or from the pool.
func studySettings(ctx context.Context, q rowQuerier) (StudySettings, error) {
	st := followup.DefaultStudySettings()
	var raw []byte
	var days []time.Time
	var fw int16
	err := q.QueryRow(ctx, `SELECT name, time_zone, contact_route, enrolment_target, follow_up_weeks, service_levels, closure_days, paper FROM study WHERE id = 1`).
		Scan(&st.Name, &st.TimeZone, &st.ContactRoute, &st.EnrolmentTarget, &fw, &raw, &days, &st.Paper)
	st.FollowUpWeeks = int(fw)
	if err == pgx.ErrNoRows {
		return st, nil
	}
	if err != nil {
		return st, err
	}
	st.Configured = true
	if err := decodeService(raw, &st); err != nil {
		return st, err
	}
	for _, d := range days {
		st.ClosureDays = append(st.ClosureDays, cohort.DateOf(d))
	}
	return st, nil
}

// StudySettings returns the study's settings, or the defaults before the study
// is set up.
func (s *Store) StudySettings(ctx context.Context) (StudySettings, error) {
	return remember(ctx, "study settings", func() (StudySettings, error) {
		st, err := studySettings(ctx, s.reader(ctx))
		return st, mapErr("study settings", err)
	})
}

// studyAudit is the audited shape of the settings.
type studyAudit struct {
	Name             string                 `json:"name"`
	TimeZone         string                 `json:"time_zone"`
	ContactRoute     string                 `json:"contact_route"`
	EnrolmentTarget  int                    `json:"enrolment_target"`
	FollowUpWeeks    int                    `json:"follow_up_weeks"`
	Service          followup.ServiceLevels `json:"service_levels"`
	EpisodeGapWeeks  int                    `json:"episode_gap_weeks"`
	ClosureDays      []string               `json:"closure_days"`
	Paper            followup.Paper         `json:"paper"`
	CasesRescheduled int                    `json:"cases_rescheduled,omitempty"`
}

func auditOfStudy(st StudySettings) studyAudit {
	a := studyAudit{Name: st.Name, TimeZone: st.TimeZone, ContactRoute: st.ContactRoute, EnrolmentTarget: st.EnrolmentTarget,
		FollowUpWeeks: st.FollowUpWeeks, Service: st.Service, EpisodeGapWeeks: st.EpisodeGapWeeks, ClosureDays: []string{}, Paper: st.Paper}
	for _, d := range st.ClosureDays {
		a.ClosureDays = append(a.ClosureDays, d.String())
	}
	return a
}

// SaveStudySettings validates (StudySettings.Validate) and stores the
// settings, then recomputes the next action and due time of every case still
// being worked, since deadlines depend on the service levels, the time zone
// and the closure days. All of it commits together with one audit event (old
// and new settings, and how many cases got a new deadline). It returns the
// settings stored and how many cases got a new deadline.
func (s *Store) SaveStudySettings(ctx context.Context, a cohort.Actor, st StudySettings) (StudySettings, int, error) {
	if err := st.Validate(); err != nil {
		return StudySettings{}, 0, err
	}
	st.Configured = true
	rescheduled := 0
	err := s.inTx(ctx, func(tx pgx.Tx) error {
		old, err := studySettings(ctx, tx)
		if err != nil {
			return err
		}
		svc, err := json.Marshal(encodeService(st))
		if err != nil {
			return err
		}
		days := make([]string, len(st.ClosureDays))
		for i, d := range st.ClosureDays {
			days[i] = d.String()
		}
		_, err = tx.Exec(ctx, `
			INSERT INTO study (id, name, time_zone, contact_route, enrolment_target, service_levels, closure_days, follow_up_weeks, paper, updated_at)
			VALUES (1, $1, $2, $3, $4, $5, $6::date[], $7, $8, now())
			ON CONFLICT (id) DO UPDATE SET name = $1, time_zone = $2, contact_route = $3, enrolment_target = $4,
			  service_levels = $5, closure_days = $6::date[], follow_up_weeks = $7, paper = $8, updated_at = now()`,
			st.Name, st.TimeZone, st.ContactRoute, st.EnrolmentTarget, svc, days, st.FollowUpWeeks, string(st.Paper))
		if err != nil {
			return err
		}
		n, err := s.rescheduleOpenCases(ctx, tx, st)
		if err != nil {
			return err
		}
		rescheduled = n
		var oldAudit any
		if old.Configured {
			oldAudit = auditOfStudy(old)
		}
		newAudit := auditOfStudy(st)
		newAudit.CasesRescheduled = n
		return audit(ctx, tx, a, "study.update", "study", "1", oldAudit, newAudit)
	})
	if err != nil {
		return StudySettings{}, 0, mapErr("save study settings", err)
	}
	return st, rescheduled, nil
}
