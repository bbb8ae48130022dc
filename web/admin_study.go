package web

import (
	"context"
	"fmt"
	"net/http"
	"slices"
	"strconv"
	"strings"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
	"cohortdesk/db"
	"cohortdesk/views"
)

// studyStore reads and saves the study settings.
type studyStore interface {
	StudySettings(ctx context.Context) (db.StudySettings, error)
	SaveStudySettings(ctx context.Context, a cohort.Actor, st db.StudySettings) (db.StudySettings, int, error)
}

// studyValues fills the settings form from stored settings.
func studyValues(st db.StudySettings) map[string]string {
	days := make([]string, len(st.ClosureDays))
	for i, d := range st.ClosureDays {
		days[i] = d.Label()
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
		"paper":                      string(st.Paper),
	}
}

func (s *Server) studySettings(w http.ResponseWriter, r *http.Request) error {
	st, err := s.store.StudySettings(r.Context())
	if err != nil {
		return err
	}
	m := views.StudySettingsModel{Page: s.page(r, "Study settings", "admin"), Values: studyValues(st)}
	if q := r.URL.Query(); q.Get("saved") == "1" {
		n, _ := strconv.Atoi(q.Get("rescheduled"))
		m.Saved = "Settings saved. Deadlines of the cases still being worked were recomputed: " + cohort.Plural(max(n, 0), "case") + " got a new due date."
		if n == 0 {
			m.Saved = "Settings saved. Deadlines of the cases still being worked were recomputed: none changed."
		}
	} else if !st.Configured {
		m.Saved = "The study is not set up yet: these are the defaults. Saving them sets the study up."
	}
	return s.ok(w, r, views.StudySettings(m))
}

func (s *Server) studySettingsSave(w http.ResponseWriter, r *http.Request) error {
	if err := r.ParseForm(); err != nil {
		return err
	}
	cur, err := s.store.StudySettings(r.Context())
	if err != nil {
		return err
	}
	st, err := studyInput(readForm(r.PostForm), cur.Paper)
	rescheduled := 0
	if err == nil {
		_, rescheduled, err = s.store.SaveStudySettings(r.Context(), s.actor(r), st)
	}
	if err != nil {
		f, ok := refused(r, err, nil)
		if !ok {
			return err
		}
		s.render(w, r, f.Status, views.StudySettings(views.StudySettingsModel{
			Page: s.page(r, "Study settings", "admin"), Values: f.Values, Errors: f.Fields}))
		return nil
	}
	http.Redirect(w, r, "/admin/study?saved=1&rescheduled="+strconv.Itoa(rescheduled), http.StatusSeeOther)
	return nil
}

// studyInput reads the settings form. Numbers that are not numbers, a zone
// that is not a zone and closure days that are not dates are refused together
// with what the settings' rules say about the rest. A form without the paper
// field (sent from an older page) keeps the paper the study has.
func studyInput(f *formReader, paper followup.Paper) (db.StudySettings, error) {
	st := db.StudySettings{Name: f.text("name"), TimeZone: f.text("time_zone"), ContactRoute: f.text("contact_route"),
		EnrolmentTarget: f.whole("enrolment_target"), EpisodeGapWeeks: f.whole("episode_gap_weeks")}
	if loc, err := time.LoadLocation(st.TimeZone); err == nil && followup.CheckTimeZone(st.TimeZone) == nil {
		st.TimeZone = loc.String() // the zone's own spelling
	}
	if f.text("follow_up_weeks") != "" {
		st.FollowUpWeeks = f.whole("follow_up_weeks")
	}
	sl := &st.Service
	sl.FirstContactWorkingDays, sl.MaxAttempts, sl.GiveUpAfterDays = f.whole("first_contact_working_days"), f.whole("max_attempts"), f.whole("give_up_after_days")
	sl.RecorderSendWithinDays, sl.RecordingBackWithinDays = f.whole("recorder_send_within_days"), f.whole("recording_back_within_days")
	sl.OverReadWithinDays, sl.ReferOrCloseWithinDays = f.whole("over_read_within_days"), f.whole("refer_or_close_within_days")
	days, err := closureDays(f.raw("closure_days"))
	if err != nil {
		f.fail("closure_days", err.Error())
	}
	st.ClosureDays = days
	st.Paper = paper
	if v := f.text("paper"); v != "" {
		st.Paper = followup.Paper(v)
	}
	return st, f.check(st.Validate)
}

// closureDays reads one date per line, written in the date style ("24 Dec
// 2026") or as YYYY-MM-DD (commas and semicolons also separate, and so do
// spaces between YYYY-MM-DD dates), naming the line of the first entry that
// is not a date or that followup.CheckClosureDay refuses. Duplicates are
// dropped; the result is sorted.
func closureDays(text string) ([]cohort.Date, error) {
	var out []cohort.Date
	seen := map[cohort.Date]bool{}
	for i, line := range strings.Split(text, "\n") {
		for _, part := range strings.FieldsFunc(line, func(r rune) bool { return r == ',' || r == ';' || r == '\r' }) {
			if strings.TrimSpace(part) == "" {
				continue
			}
			entries := []string{part}
			if _, err := cohort.ParseDay(part); err != nil {
				entries = strings.Fields(part) // several YYYY-MM-DD dates on one line
			}
			for _, v := range entries {
				d, err := cohort.ParseDay(v)
				if err == nil {
					err = followup.CheckClosureDay(d)
				}
				if err != nil {
					return nil, fmt.Errorf("line %d: %q is not a date between 2000 and 2100 (write 24 Dec 2026 or 2026-12-24)", i+1, strings.TrimSpace(v))
				}
				if !seen[d] {
					seen[d] = true
					out = append(out, d)
				}
			}
		}
	}
	slices.SortFunc(out, func(a, b cohort.Date) int { return a.DaysSince(b) })
	return out, nil
}
