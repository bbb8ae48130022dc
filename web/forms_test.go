package web

import (
	"errors"
	"fmt"
	"net/http"
	"net/http/httptest"
	"net/url"
	"slices"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
)

func formRequest(vals url.Values) *http.Request {
	r := httptest.NewRequest("POST", "/", strings.NewReader(vals.Encode()))
	r.Header.Set("Content-Type", "application/x-www-form-urlencoded")
	_ = r.ParseForm()
	return r
}

func TestRefused(t *testing.T) {
	r := formRequest(url.Values{"study_id": {"RS-1"}, "reason": {"moved"}})
	clash := map[string]string{"form": "this clashes with a stored record", "study_id": "already in use"}
	for _, c := range []struct {
		name    string
		err     error
		clash   map[string]string
		status  int
		fields  map[string]string
		message string
	}{
		{"invalid input", &cohort.ValidationError{Fields: map[string]string{"reason": "say why", "at": "in the future"}}, nil,
			422, map[string]string{"reason": "say why", "at": "in the future"}, "in the future; say why"},
		{"stale copy", fmt.Errorf("wrapped: %w", &cohort.ConflictError{Message: "someone else changed it"}), clash,
			409, map[string]string{"form": "someone else changed it"}, "someone else changed it"},
		{"clash worded by the form", fmt.Errorf("db: enrol: %w", cohort.ErrConflict), clash, 409, clash, "this clashes with a stored record"},
		{"clash without words", fmt.Errorf("db: enrol: %w", cohort.ErrConflict), nil,
			409, map[string]string{"form": "The action could not be completed."}, "The action could not be completed."},
		{"a conflict with its own words", &cohort.PublicError{Message: "already signed off", Kind: cohort.ErrConflict}, nil,
			409, map[string]string{"form": "already signed off"}, "already signed off"},
	} {
		f, ok := refused(r, c.err, c.clash)
		if !ok || f.Status != c.status || f.Message != c.message || fmt.Sprint(f.Fields) != fmt.Sprint(c.fields) {
			t.Errorf("%s: %v %+v, want %d %v %q", c.name, ok, f, c.status, c.fields, c.message)
		}
		if f.Values["study_id"] != "RS-1" || f.Values["reason"] != "moved" {
			t.Errorf("%s: the entered values are not kept: %v", c.name, f.Values)
		}
	}
	for _, err := range []error{nil, errors.New("disk on fire"), fmt.Errorf("x: %w", cohort.ErrNotFound), fmt.Errorf("x: %w", cohort.ErrForbidden)} {
		if _, ok := refused(r, err, clash); ok {
			t.Errorf("%v is taken for a refused form", err)
		}
	}
	f, _ := refused(r, &cohort.ValidationError{Fields: map[string]string{"state": "choose", "note": "long"}}, nil)
	if got := f.renamed(map[string]string{"state": "close-state"}).Fields; got["close-state"] != "choose" || got["note"] != "long" || len(got) != 2 {
		t.Errorf("renamed fields %v", got)
	}
}

func TestFormReader(t *testing.T) {
	f := readForm(url.Values{"on": {" 2026-03-02 "}, "bad": {"2026-02-30"}, "n": {"12"}, "x": {"twelve"}, "empty": {""},
		"at": {"2026-03-02T09:15"}, "atbad": {"9:15"}, "box": {"on"}, "version": {"7"}})
	if d := f.date("on", "enrolment date"); d != (cohort.Date{Year: 2026, Month: 3, Day: 2}) {
		t.Errorf("date %v", d)
	}
	f.date("bad", "enrolment date")
	if f.optionalDate("empty", "birth date") != nil || f.whole("n") != 12 || !f.ticked("box") || f.version() != 7 {
		t.Error("a readable field was misread")
	}
	f.whole("x")
	if got := f.localTime("at", tokyo(t)); got.UTC().Format("2006-01-02 15:04") != "2026-03-02 00:15" {
		t.Errorf("local time %v, want 09:15 in Tokyo (UTC+9)", got)
	}
	f.localTime("atbad", tokyo(t))
	err := f.check(func() error {
		return &cohort.ValidationError{Fields: map[string]string{"bad": "a rule's word", "site_id": "choose a site"}}
	})
	var ve *cohort.ValidationError
	if !errors.As(err, &ve) {
		t.Fatalf("check: %v", err)
	}
	want := map[string]string{"bad": "enter the enrolment date as YYYY-MM-DD", "x": `"twelve" is not a whole number`,
		"atbad": "enter the time as YYYY-MM-DD HH:MM", "site_id": "choose a site"}
	if fmt.Sprint(ve.Fields) != fmt.Sprint(want) {
		t.Errorf("messages %v\nwant %v", ve.Fields, want)
	}
	if err := readForm(url.Values{"n": {"1"}}).check(func() error { t.Error("rules run on a readable form"); return nil }); err != nil {
		t.Errorf("readable form refused: %v", err)
	}
}

func tokyo(t *testing.T) *time.Location {
	t.Helper()
	loc, err := time.LoadLocation("Asia/Tokyo")
	if err != nil {
		t.Fatal(err)
	}
	return loc
}

func TestStudySettingsFormReading(t *testing.T) {
	form := url.Values{"name": {" Rhythm study "}, "time_zone": {"europe/lisbon"}, "enrolment_target": {"2400"}, "follow_up_weeks": {""},
		"first_contact_working_days": {"two"}, "max_attempts": {"0"}, "give_up_after_days": {"14"}, "recorder_send_within_days": {"5"},
		"recording_back_within_days": {"14"}, "over_read_within_days": {"7"}, "refer_or_close_within_days": {"3"},
		"episode_gap_weeks": {"2"}, "closure_days": {"2026-12-25\n2026-13-01"}}
	_, err := studyInput(readForm(form), followup.PaperA4)
	var ve *cohort.ValidationError
	if !errors.As(err, &ve) {
		t.Fatalf("unreadable settings: %v", err)
	}
	// Reading problems and the rules' messages for the rest, at once.
	for field, want := range map[string]string{"first_contact_working_days": "whole number", "closure_days": "line 2", "max_attempts": "1 to 100"} {
		if !strings.Contains(ve.Fields[field], want) {
			t.Errorf("%s: message %q lacks %q", field, ve.Fields[field], want)
		}
	}
	form.Set("first_contact_working_days", "3")
	form.Set("max_attempts", "4")
	form.Set("closure_days", "2026-12-25, 2026-01-01\n2026-12-25")
	form.Set("time_zone", "Europe/Lisbon")
	st, err := studyInput(readForm(form), followup.PaperA4)
	if err != nil || st.Name != "Rhythm study" || st.TimeZone != "Europe/Lisbon" || st.Service.FirstContactWorkingDays != 3 ||
		st.FollowUpWeeks != 0 || len(st.ClosureDays) != 2 || st.ClosureDays[0].String() != "2026-01-01" {
		t.Fatalf("read %+v %v", st, err)
	}
}

// FuzzClosureDays feeds arbitrary text to the closure-days field: it never
// panics, and whatever it accepts is sorted, free of duplicates, within the
// years followup.CheckClosureDay allows, and reads back the same when written
// one date per line.
func FuzzClosureDays(f *testing.F) {
	for _, seed := range []string{"", "2026-12-25", "2026-12-25\n2026-01-01, 2026-12-25", " 2026-02-29", "2026-13-01", "1999-12-31",
		"2026-07-04;2026-07-03\r\n", "\t,,;", "2026-1-5", "20261225", "24 Dec 2026\nFri 25 Dec 2026", "2026-12-24 2026-12-31"} {
		f.Add(seed)
	}
	f.Fuzz(func(t *testing.T, text string) {
		days, err := closureDays(text)
		if err != nil {
			if !strings.HasPrefix(err.Error(), "line ") {
				t.Fatalf("%q: %v, want a message naming the line", text, err)
			}
			return
		}
		var lines, labels []string
		for i, d := range days {
			if i > 0 && !days[i-1].Before(d) {
				t.Fatalf("%q: days not sorted and unique: %v", text, days)
			}
			if d.Year < 2000 || d.Year > 2100 {
				t.Fatalf("%q: accepted %s", text, d)
			}
			lines = append(lines, d.String())
			labels = append(labels, d.Label())
		}
		again, err := closureDays(strings.Join(lines, "\n"))
		if err != nil || !slices.Equal(again, days) {
			t.Fatalf("%q: round trip gave %v (%v), want %v", text, again, err, days)
		}
		// The form shows the days in the date style; saved unchanged, they
		// read back the same.
		again, err = closureDays(strings.Join(labels, "\n"))
		if err != nil || !slices.Equal(again, days) {
			t.Fatalf("%q: round trip in the date style gave %v (%v), want %v", text, again, err, days)
		}
	})
}
