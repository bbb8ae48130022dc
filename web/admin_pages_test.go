package web

import (
	"context"
	"net/url"
	"regexp"
	"strconv"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"

	"github.com/chromedp/chromedp"
)

// TestAdministrationSaysWhatChanged does an administrator's settings change
// and audit check in the browser on the small demo with one case being
// worked:
//   - the study settings show the study's name whole, every deadline says it
//     counts working days, and the save says how many cases got a new due
//     date (the number the audit trail recorded);
//   - the audit trail shows that change as the one field changed, before and
//     after, in words, with no stored object or internal key; objects that
//     belong to a participant carry their study ID, and typing a study ID or
//     a person's name finds their events;
//   - a name or study ID that matches nothing is said so beside its field;
//   - the audit page fits a 1366 px wide window.
func TestAdministrationSaysWhatChanged(t *testing.T) {
	a := newApp(t)
	sid := newJourneyFixture(t, a).sid // the small demo and one case being worked
	ctx := context.Background()
	tb := newTab(t, a, 3*time.Minute)
	tb.signIn(cohort.Admin)

	tb.open("/admin/study", `[data-testid="study-settings"]`)
	if cut := tb.eval(`(() => { const el = document.getElementById('name'); return el.scrollWidth > el.clientWidth + 1 })()`); cut != "false" {
		t.Errorf("the study's name %q does not fit its field", tb.eval(`document.getElementById('name').value`))
	}
	for _, label := range strings.Split(tb.eval(`Array.from(document.querySelectorAll('[data-testid="study-settings"] label')).map(l => l.textContent).join('\n')`), "\n") {
		if strings.Contains(label, "within") && !strings.Contains(label, "working days") {
			t.Errorf("deadline %q does not say it counts working days", label)
		}
	}
	before := tb.eval(`document.getElementById('over_read_within_days').value`)
	n, _ := strconv.Atoi(before)
	for _, f := range []string{"first_contact_working_days", "recorder_send_within_days", "recording_back_within_days", "over_read_within_days", "refer_or_close_within_days"} {
		v, _ := strconv.Atoi(tb.eval(`document.getElementById('` + f + `').value`))
		tb.b.Do("lengthen a deadline", chromedp.SetValue(chromedp.ID(f), strconv.Itoa(v+2)))
	}
	tb.follow("save the settings", `[data-testid="save-settings"]`, `[data-testid="settings-saved"]`)
	saved := tb.b.Text("saved message", `[data-testid="settings-saved"]`)
	var rescheduled int
	if err := a.store.Pool().QueryRow(ctx, `SELECT coalesce((new_value->>'cases_rescheduled')::int, 0) FROM audit_events WHERE action = 'study.update' ORDER BY id DESC LIMIT 1`).Scan(&rescheduled); err != nil {
		t.Fatal(err)
	}
	if rescheduled == 0 {
		t.Fatal("lengthening the deadlines rescheduled no case of the demo: the check below would say nothing")
	}
	if want := cohort.Plural(rescheduled, "case") + " got a new due date"; !strings.Contains(saved, want) {
		t.Errorf("the save says %q, want it to say %q", saved, want)
	}

	tb.b.Do("set a 1366 px window", chromedp.EmulateViewport(1366, 900))
	tb.open("/admin/audit?action=study.update", `[data-testid="audit-table"]`)
	change := tb.b.Text("the settings change", `[data-testid="audit-table"] tbody tr [data-testid="audit-changes"]`)
	if want := "over read within days: " + before + " → " + strconv.Itoa(n+2); !strings.Contains(change, want) {
		t.Errorf("the settings change reads %q, want %q", change, want)
	}
	if strings.Contains(change, "name:") || strings.ContainsAny(change, "{}\"") || regexp.MustCompile(`[a-z]_[a-z]|[a-z][A-Z]`).MatchString(change) {
		t.Errorf("the settings change shows unchanged fields, stored objects or internal keys: %q", change)
	}
	if w := tb.eval(`document.documentElement.scrollWidth`); w != "1366" {
		t.Errorf("the audit page is %s px wide in a 1366 px window", w)
	}

	tb.open("/admin/audit?object_id="+url.QueryEscape(strings.ToLower(sid)), `[data-testid="audit-filter"]`)
	objects := tb.eval(`Array.from(document.querySelectorAll('[data-testid="audit-object"]')).map(td => td.textContent).join('\n')`)
	if objects == "" {
		t.Fatalf("no event found by the study ID %s", sid)
	}
	for _, o := range strings.Split(objects, "\n") {
		if !strings.Contains(o, sid) {
			t.Errorf("filtered by %s, the trail shows an event about %q", sid, o)
		}
	}
	if !strings.Contains(objects, "case ") {
		t.Errorf("the events of %s's case are not found by the study ID: %q", sid, objects)
	}

	tb.open("/admin/audit?actor="+url.QueryEscape("test admin"), `[data-testid="audit-filter"]`)
	who := tb.eval(`Array.from(document.querySelectorAll('[data-testid="audit-table"] tbody tr td:nth-child(3)')).map(td => td.textContent).join('\n')`)
	if who == "" {
		t.Error("no event found by the name typed in the person field")
	}
	for _, w := range strings.Split(who, "\n") {
		if w != "" && !strings.Contains(w, "Test Administrator") {
			t.Errorf("filtered by the administrator's name, the trail shows an event by %q", w)
		}
	}

	tb.open("/admin/audit?actor=Zelda&object_id=QRW-9999-Z", `[data-testid="audit-problems"]`)
	if msg := tb.b.Text("who", `[data-testid="error-actor"]`); !strings.Contains(msg, "Zelda") {
		t.Errorf("an unknown name is answered %q", msg)
	}
	if msg := tb.b.Text("study ID", `[data-testid="error-object_id"]`); !strings.Contains(msg, "QRW-9999-Z") {
		t.Errorf("an unknown study ID is answered %q", msg)
	}
	if tb.has(`[data-testid="audit-table"]`) {
		t.Error("a filter that finds nobody still lists events")
	}
}
