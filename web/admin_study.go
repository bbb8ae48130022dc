package web

import (
	"context"
	"errors"
	"net/http"
	"strconv"
	"strings"

	"cohortdesk/cohort"
	"cohortdesk/db"
	"cohortdesk/views"
)

// studyStore reads and saves the study settings.
type studyStore interface {
	StudySettings(ctx context.Context) (db.StudySettings, error)
	SaveStudySettings(ctx context.Context, a cohort.Actor, in db.StudySettingsInput) (db.StudySettings, error)
}

// studyValues fills the settings form from stored settings.
func studyValues(st db.StudySettings) map[string]string {
	days := make([]string, len(st.ClosureDays))
	for i, d := range st.ClosureDays {
		days[i] = d.String()
	}
	sl := st.Service
	return map[string]string{
		"name": st.Name, "time_zone": st.TimeZone, "contact_route": st.ContactRoute,
		"enrolment_target":           strconv.Itoa(st.EnrolmentTarget),
		"follow_up_weeks":            strconv.Itoa(st.FollowUpWeeks),
		"first_contact_working_days": strconv.Itoa(sl.FirstContactWorkingDays),
		"max_attempts":               strconv.Itoa(sl.MaxAttempts),
		"give_up_after_days":         strconv.Itoa(sl.GiveUpAfterDays),
		"recorder_send_within_days":  strconv.Itoa(sl.RecorderSendWithinDays),
		"recording_back_within_days": strconv.Itoa(sl.RecordingBackWithinDays),
		"over_read_within_days":      strconv.Itoa(sl.OverReadWithinDays),
		"refer_or_close_within_days": strconv.Itoa(sl.ReferOrCloseWithinDays),
		"episode_gap_weeks":          strconv.Itoa(st.EpisodeGapWeeks),
		"closure_days":               strings.Join(days, "\n"),
	}
}

func (s *Server) studySettings(w http.ResponseWriter, r *http.Request) error {
	st, err := s.store.StudySettings(r.Context())
	if err != nil {
		return err
	}
	m := views.StudySettingsModel{Page: s.page(r, "Study settings", "admin"), Values: studyValues(st)}
	if r.URL.Query().Get("saved") == "1" {
		m.Saved = "Settings saved. Deadlines of the cases still being worked were recomputed."
	} else if !st.Configured {
		m.Saved = "The study is not set up yet: these are the defaults. Saving them sets the study up."
	}
	return s.ok(w, r, views.StudySettings(m))
}

func (s *Server) studySettingsSave(w http.ResponseWriter, r *http.Request) error {
	if err := r.ParseForm(); err != nil {
		return err
	}
	f := r.PostForm
	in := db.StudySettingsInput{Name: f.Get("name"), TimeZone: f.Get("time_zone"), ContactRoute: f.Get("contact_route"),
		EnrolmentTarget: f.Get("enrolment_target"), FollowUpWeeks: f.Get("follow_up_weeks"), FirstContactWorkingDays: f.Get("first_contact_working_days"),
		MaxAttempts: f.Get("max_attempts"), GiveUpAfterDays: f.Get("give_up_after_days"),
		RecorderSendWithinDays: f.Get("recorder_send_within_days"), RecordingBackWithinDays: f.Get("recording_back_within_days"),
		OverReadWithinDays: f.Get("over_read_within_days"), ReferOrCloseWithinDays: f.Get("refer_or_close_within_days"),
		EpisodeGapWeeks: f.Get("episode_gap_weeks"), ClosureDays: f.Get("closure_days")}
	_, err := s.store.SaveStudySettings(r.Context(), s.actor(r), in)
	var ve *cohort.ValidationError
	if errors.As(err, &ve) {
		vals := map[string]string{}
		for k := range f {
			vals[k] = f.Get(k)
		}
		s.render(w, r, http.StatusUnprocessableEntity, views.StudySettings(views.StudySettingsModel{
			Page: s.page(r, "Study settings", "admin"), Values: vals, Errors: ve.Fields}))
		return nil
	}
	if err != nil {
		return err
	}
	http.Redirect(w, r, "/admin/study?saved=1", http.StatusSeeOther)
	return nil
}
