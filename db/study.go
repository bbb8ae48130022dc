package db

import (
	"context"
	"encoding/json"
	"fmt"
	"slices"
	"strconv"
	"strings"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"

	"github.com/jackc/pgx/v5"
)

// DefaultEpisodeGapWeeks is the episode gap used until the study sets one: two
// positive weeks at most this many weeks apart belong to one episode, so one
// negative or missing week between two positives does not open a second case.
// An illustrative default of ours.
const DefaultEpisodeGapWeeks = 2

// maxEpisodeGapWeeks bounds the gap; a larger value would merge a whole
// study's flags into one case.
const maxEpisodeGapWeeks = 26

// StudySettings are the study-wide settings an administrator edits. The
// follow-up settings live in the study row's service_levels JSON (the fields of
// followup.ServiceLevels plus the episode gap), so adding one needs no schema
// change.
type StudySettings struct {
	Name            string
	TimeZone        string
	ContactRoute    string // generic contact route printed on referral summaries
	EnrolmentTarget int
	FollowUpWeeks   int // weeks of wear data per participant; 0: open-ended
	Service         followup.ServiceLevels
	EpisodeGapWeeks int
	ClosureDays     []cohort.Date // days the team does not work, besides weekends; sorted
	Configured      bool          // false until an administrator first saves the settings
}

// DefaultStudySettings are the settings of a study nobody has set up yet.
func DefaultStudySettings() StudySettings {
	return StudySettings{TimeZone: "UTC", Service: followup.DefaultServiceLevels(), EpisodeGapWeeks: DefaultEpisodeGapWeeks}
}

// Location is the study's time zone; UTC when the stored name is unreadable.
func (st StudySettings) Location() *time.Location {
	loc, err := time.LoadLocation(st.TimeZone)
	if err != nil {
		return time.UTC
	}
	return loc
}

// Calendar is the study's working-day calendar: its zone, its closure days and
// a Saturday-Sunday weekend.
func (st StudySettings) Calendar() followup.Calendar {
	return followup.NewCalendar(st.Location(), st.ClosureDays...)
}

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
	st := DefaultStudySettings()
	var raw []byte
	var days []time.Time
	var fw int16
	err := q.QueryRow(ctx, `SELECT name, time_zone, contact_route, enrolment_target, follow_up_weeks, service_levels, closure_days FROM study WHERE id = 1`).
		Scan(&st.Name, &st.TimeZone, &st.ContactRoute, &st.EnrolmentTarget, &fw, &raw, &days)
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
	st, err := studySettings(ctx, s.pool)
	return st, mapErr("study settings", err)
}

// StudySettingsInput is the settings form as submitted: numbers are still
// text, so a typing slip is reported beside its field instead of failing the
// whole form.
type StudySettingsInput struct {
	Name            string
	TimeZone        string
	ContactRoute    string
	EnrolmentTarget string
	FollowUpWeeks   string
	// followup.ServiceLevels fields, named as the form (and ServiceLevels.Validate) names them
	FirstContactWorkingDays string
	MaxAttempts             string
	GiveUpAfterDays         string
	RecorderSendWithinDays  string
	RecordingBackWithinDays string
	OverReadWithinDays      string
	ReferOrCloseWithinDays  string
	EpisodeGapWeeks         string
	ClosureDays             string // one date (YYYY-MM-DD) per line; commas also separate
}

// Parse checks the form and returns the settings it describes. Every problem
// is reported under the form field's name.
func (in StudySettingsInput) Parse() (StudySettings, error) {
	var ve cohort.ValidationError
	st := StudySettings{Name: strings.TrimSpace(in.Name), TimeZone: strings.TrimSpace(in.TimeZone), ContactRoute: strings.TrimSpace(in.ContactRoute)}
	if st.Name == "" || len(st.Name) > 120 {
		ve.Add("name", "enter the study's name (up to 120 characters)")
	}
	if loc, err := time.LoadLocation(st.TimeZone); err != nil || st.TimeZone == "" || strings.EqualFold(st.TimeZone, "local") {
		ve.Add("time_zone", "enter a time zone name such as America/Chicago or Europe/Lisbon")
	} else {
		st.TimeZone = loc.String()
	}
	if len(st.ContactRoute) > 500 {
		ve.Add("contact_route", "use at most 500 characters")
	}
	number := func(field, v string, dst *int) {
		n, err := strconv.Atoi(strings.TrimSpace(v))
		if err != nil {
			ve.Add(field, fmt.Sprintf("%q is not a whole number", v))
			return
		}
		*dst = n
	}
	number("enrolment_target", in.EnrolmentTarget, &st.EnrolmentTarget)
	if _, bad := ve.Fields["enrolment_target"]; !bad && (st.EnrolmentTarget < 0 || st.EnrolmentTarget > 10_000_000) {
		ve.Add("enrolment_target", "enter a target from 0 to 10,000,000 participants")
	}
	if strings.TrimSpace(in.FollowUpWeeks) != "" {
		number("follow_up_weeks", in.FollowUpWeeks, &st.FollowUpWeeks)
		if _, bad := ve.Fields["follow_up_weeks"]; !bad && (st.FollowUpWeeks < 0 || st.FollowUpWeeks > 520) {
			ve.Add("follow_up_weeks", "enter 0 (open-ended) to 520 weeks")
		}
	}
	sl := &st.Service
	number("first_contact_working_days", in.FirstContactWorkingDays, &sl.FirstContactWorkingDays)
	number("max_attempts", in.MaxAttempts, &sl.MaxAttempts)
	number("give_up_after_days", in.GiveUpAfterDays, &sl.GiveUpAfterDays)
	number("recorder_send_within_days", in.RecorderSendWithinDays, &sl.RecorderSendWithinDays)
	number("recording_back_within_days", in.RecordingBackWithinDays, &sl.RecordingBackWithinDays)
	number("over_read_within_days", in.OverReadWithinDays, &sl.OverReadWithinDays)
	number("refer_or_close_within_days", in.ReferOrCloseWithinDays, &sl.ReferOrCloseWithinDays)
	if err := sl.Validate(); err != nil {
		if sve, ok := err.(*cohort.ValidationError); ok {
			for f, msg := range sve.Fields {
				ve.Add(f, msg) // a parse message, when there is one, stays first
			}
		}
	}
	number("episode_gap_weeks", in.EpisodeGapWeeks, &st.EpisodeGapWeeks)
	if _, bad := ve.Fields["episode_gap_weeks"]; !bad && (st.EpisodeGapWeeks < 1 || st.EpisodeGapWeeks > maxEpisodeGapWeeks) {
		ve.Add("episode_gap_weeks", fmt.Sprintf("%d: want 1 to %d weeks", st.EpisodeGapWeeks, maxEpisodeGapWeeks))
	}
	days, err := parseClosureDays(in.ClosureDays)
	if err != nil {
		ve.Add("closure_days", err.Error())
	}
	st.ClosureDays = days
	if err := ve.Err(); err != nil {
		return StudySettings{}, err
	}
	return st, nil
}

// parseClosureDays reads one date per line (commas and spaces also separate),
// naming the line of the first bad entry. Duplicates are dropped; the result
// is sorted.
func parseClosureDays(text string) ([]cohort.Date, error) {
	var out []cohort.Date
	seen := map[cohort.Date]bool{}
	for i, line := range strings.Split(text, "\n") {
		for _, f := range strings.FieldsFunc(line, func(r rune) bool { return r == ',' || r == ';' || r == ' ' || r == '\t' || r == '\r' }) {
			d, err := cohort.ParseDate(f)
			if err != nil || d.Year < 2000 || d.Year > 2100 {
				return nil, fmt.Errorf("line %d: %q is not a date between 2000 and 2100 written YYYY-MM-DD", i+1, f)
			}
			if !seen[d] {
				seen[d] = true
				out = append(out, d)
			}
		}
	}
	slices.SortFunc(out, func(a, b cohort.Date) int { return a.DaysSince(b) })
	if len(out) > 1000 {
		return nil, fmt.Errorf("%d dates: at most 1000 closure days", len(out))
	}
	return out, nil
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
	CasesRescheduled int                    `json:"cases_rescheduled,omitempty"`
}

func auditOfStudy(st StudySettings) studyAudit {
	a := studyAudit{Name: st.Name, TimeZone: st.TimeZone, ContactRoute: st.ContactRoute, EnrolmentTarget: st.EnrolmentTarget,
		FollowUpWeeks: st.FollowUpWeeks, Service: st.Service, EpisodeGapWeeks: st.EpisodeGapWeeks, ClosureDays: []string{}}
	for _, d := range st.ClosureDays {
		a.ClosureDays = append(a.ClosureDays, d.String())
	}
	return a
}

// SaveStudySettings validates and stores the settings, then recomputes the
// next action and due time of every case still being worked, since deadlines
// depend on the service levels, the time zone and the closure days. All of it
// commits together with one audit event (old and new settings, and how many
// cases got a new deadline).
func (s *Store) SaveStudySettings(ctx context.Context, a cohort.Actor, in StudySettingsInput) (StudySettings, error) {
	st, err := in.Parse()
	if err != nil {
		return StudySettings{}, err
	}
	st.Configured = true
	err = s.inTx(ctx, func(tx pgx.Tx) error {
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
			INSERT INTO study (id, name, time_zone, contact_route, enrolment_target, service_levels, closure_days, follow_up_weeks, updated_at)
			VALUES (1, $1, $2, $3, $4, $5, $6::date[], $7, now())
			ON CONFLICT (id) DO UPDATE SET name = $1, time_zone = $2, contact_route = $3, enrolment_target = $4,
			  service_levels = $5, closure_days = $6::date[], follow_up_weeks = $7, updated_at = now()`,
			st.Name, st.TimeZone, st.ContactRoute, st.EnrolmentTarget, svc, days, st.FollowUpWeeks)
		if err != nil {
			return err
		}
		n, err := s.rescheduleOpenCases(ctx, tx, st)
		if err != nil {
			return err
		}
		var oldAudit any
		if old.Configured {
			oldAudit = auditOfStudy(old)
		}
		newAudit := auditOfStudy(st)
		newAudit.CasesRescheduled = n
		return audit(ctx, tx, a, "study.update", "study", "1", oldAudit, newAudit)
	})
	if err != nil {
		return StudySettings{}, mapErr("save study settings", err)
	}
	return st, nil
}
