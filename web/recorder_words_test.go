package web

import (
	"context"
	"fmt"
	"html"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/ecg"
	"cohortdesk/cohort/overread"
)

// TestRecorderReadingInOurWords: the recorder's own reading reads the same,
// in our words, on the add-recording form (every reading offered by its
// label), the case page's timeline, the recording page, the confirmations
// queue and the statistics page's comparison text; the earlier words are
// nowhere.
func TestRecorderReadingInOurWords(t *testing.T) {
	a := newApp(t)
	ids := shippedCases(t, a, 2)
	ctx := context.Background()
	coord := a.users[cohort.Coordinator].Actor("", "")
	rec, err := a.store.AddRecording(ctx, coord, ids[0], ecg.RecordingInput{TakenAt: time.Now(), DurationS: 45, Auto: overread.AutoSuggestsAF})
	if err != nil {
		t.Fatal(err)
	}
	inv, co := a.signIn(cohort.Investigator), a.signIn(cohort.Coordinator)
	page := func(role string, path string) string {
		t.Helper()
		c := inv
		if role == "coordinator" {
			c = co
		}
		res, body := a.get(c, path)
		if res.StatusCode != 200 {
			t.Fatalf("%s: status %d", path, res.StatusCode)
		}
		return html.UnescapeString(body)
	}
	said := overread.AutoSuggestsAF.Label()
	form := between(page("coordinator", fmt.Sprintf("/cases/%d", ids[1])), `data-testid="form-recording"`, "</form>")
	if form == "" {
		t.Fatal("no add-recording form on the case page")
	}
	for _, au := range overread.Autos() {
		if !strings.Contains(form, fmt.Sprintf(`value="%s"`, au)) || !strings.Contains(form, ">"+au.Label()+"<") {
			t.Errorf("the add-recording form does not offer %s as %q", au, au.Label())
		}
	}
	for _, tt := range []struct{ name, role, path, want string }{
		{"case page timeline", "coordinator", fmt.Sprintf("/cases/%d", ids[0]), overread.AutoHeading + ": " + said},
		{"recording page", "investigator", fmt.Sprintf("/recordings/%d", rec.ID), said},
		{"confirmations queue", "investigator", "/confirmations", said},
		{"statistics", "investigator", "/confirmations/statistics", overread.CategoryMapping},
	} {
		body := page(tt.role, tt.path)
		if !strings.Contains(body, tt.want) {
			t.Errorf("%s does not say %q", tt.name, tt.want)
		}
		for _, old := range []string{"possible AF", "none given", "unclassified", "Recorder's own interpretation", "Recorder's reading<"} {
			if strings.Contains(body, old) {
				t.Errorf("%s still says %q", tt.name, old)
			}
		}
	}
}
