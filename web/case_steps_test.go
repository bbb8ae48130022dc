package web

import (
	"fmt"
	"net/http"
	"net/url"
	"strings"
	"testing"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
)

// TestCaseStepRoutesFollowTheStepRules: the route table admits to each case
// step's routes exactly the roles followup says may take the step, so a page
// never offers a form its route refuses and no route lets in a role the rule
// leaves out.
func TestCaseStepRoutesFollowTheStepRules(t *testing.T) {
	a := newApp(t)
	routes := map[followup.Step][]string{
		followup.StepAssign:    {"/cases/{id}/assign", "/cases/bulk/assign"},
		followup.StepAttempt:   {"/cases/{id}/attempts", "/cases/bulk/letter"},
		followup.StepMessage:   {"/cases/{id}/messages", "/cases/bulk/messages", "/cases/bulk/letters", "/letters/{id}/posted"},
		followup.StepShipment:  {"/cases/{id}/shipment"},
		followup.StepReturn:    {"/cases/{id}/return"},
		followup.StepRecording: {"/cases/{id}/recordings"},
		followup.StepMove:      {"/cases/{id}/move"},
		followup.StepClose:     {"/cases/{id}/close"},
		followup.StepNote:      {"/cases/{id}/note"},
		followup.StepOverRead:  {"/recordings/{id}/over-reads", "/recordings/{id}/over-reads/revise", "/recordings/{id}/not-needed"},
		followup.StepSignOff:   {"/referrals/{id}/signoff"},
	}
	for step, patterns := range routes {
		for _, p := range patterns {
			acc, ok := a.srv.accessOf("POST", p)
			if !ok {
				t.Errorf("POST %s is not in the route table", p)
				continue
			}
			for _, r := range cohort.Roles {
				if acc.allows(r) != step.By(r) {
					t.Errorf("POST %s admits %s: %v; the step %s by %s: %v", p, r, acc.allows(r), step, r, step.By(r))
				}
			}
		}
	}
}

// TestCasePageOffersTheStepsOfItsState walks a case through its states and
// checks the forms the page shows against followup.Offers.
func TestCasePageOffersTheStepsOfItsState(t *testing.T) {
	a := newApp(t)
	ids := seedFollowUp(t, a.store, 1)
	coord := a.signIn(cohort.Coordinator)
	forms := map[followup.Step]string{followup.StepAssign: "form-assign", followup.StepAttempt: "form-attempt",
		followup.StepShipment: "form-shipment", followup.StepReturn: "form-return", followup.StepMove: "form-move",
		followup.StepClose: "form-close", followup.StepNote: "form-note", followup.StepRecording: "form-recording"}
	path := fmt.Sprintf("/cases/%d", ids[0])
	check := func(st followup.State) {
		t.Helper()
		_, body := a.get(coord, path)
		for step, testid := range forms {
			want := followup.Offered(st, cohort.Coordinator, step)
			if got := strings.Contains(body, `data-testid="`+testid+`"`); got != want {
				t.Errorf("%s: form %s shown %v, want %v", st, testid, got, want)
			}
		}
	}
	check(followup.Open)
	a.postForm(coord, path+"/attempts", url.Values{"version": {"1"}, "channel": {"phone"}, "outcome": {"reached"}})
	check(followup.Reached)
	a.postForm(coord, path+"/shipment", url.Values{"version": {"2"}, "sent_on": {cohort.DateOf(a.srv.now().UTC()).String()}})
	check(followup.RecorderSent)
	a.postForm(coord, path+"/close", url.Values{"version": {"3"}, "close-state": {"closed_unreachable"}, "reason": {"lost to follow-up"}})
	check(followup.ClosedUnreachable)
}

// TestRefusedParticipantFormNamesEveryProblem: what the form cannot read
// (a birth date that is no date) and what the enrolment rules refuse come
// back together, beside their fields, with the values kept.
func TestRefusedParticipantFormNamesEveryProblem(t *testing.T) {
	a := newApp(t)
	a.exec(`INSERT INTO sites (code, name, time_zone) VALUES ('RV', 'Riverside clinic', 'UTC')`)
	coord := a.signIn(cohort.Coordinator)
	form := url.Values{"study_id": {"bad id"}, "site_id": {"1"}, "sex": {"U"}, "time_zone": {"Mars/Base"}, "enrolled_on": {"2026-03-02"},
		"birth_date": {"1950-13-01"}, "zip": {"12"}, "given_name": {"Ilsa"}}
	res, body := a.postFormBody(coord, "/participants", form)
	if res.StatusCode != http.StatusUnprocessableEntity {
		t.Fatalf("status %d, want 422", res.StatusCode)
	}
	for _, want := range []string{`data-testid="error-birth_date"`, "enter the birth date as YYYY-MM-DD", `data-testid="error-study_id"`,
		`data-testid="error-time_zone"`, `data-testid="error-zip"`, `value="Ilsa"`} {
		if !strings.Contains(body, want) {
			t.Errorf("refused enrolment lacks %s", want)
		}
	}
	// A withdrawal date that is no date.
	form = url.Values{"study_id": {"RV-1"}, "site_id": {"1"}, "sex": {"F"}, "time_zone": {"UTC"}, "enrolled_on": {"2026-03-02"}}
	if res := a.postForm(coord, "/participants", form); res.StatusCode != http.StatusSeeOther {
		t.Fatalf("enrol: status %d", res.StatusCode)
	}
	if res, _ := a.postFormBody(coord, "/participants", form); res.StatusCode != http.StatusConflict {
		t.Fatalf("second enrolment with the same study ID: status %d, want 409", res.StatusCode)
	}
	res, body = a.postFormBody(coord, "/participants/1/withdraw", url.Values{"version": {"1"}, "withdrawn_on": {"soon"}})
	if res.StatusCode != http.StatusUnprocessableEntity || !strings.Contains(body, "enter the withdrawal date as YYYY-MM-DD") ||
		!strings.Contains(body, `data-testid="error-reason"`) {
		t.Fatalf("withdrawal: status %d\n%s", res.StatusCode, body)
	}
}
