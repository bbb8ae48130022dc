package web

import (
	"context"
	"fmt"
	"net/url"
	"regexp"
	"slices"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/deid"

	"github.com/chromedp/chromedp"
)

// The small slips of a day's work: feedback that lands where the person
// looks, statuses that do not call a useless import done, counted words that
// agree with their count, facts said once, defaults from the study's own
// settings, one rule for a thing shown on two pages, lists in the order they
// say.

// TestNoteSavedLandsAtTheNotes saves a note on a participant's page in the
// browser: the page comes back scrolled to the notes, which say the note was
// saved and show it.
func TestNoteSavedLandsAtTheNotes(t *testing.T) {
	a := newApp(t)
	f := newJourneyFixture(t, a)
	tb := newTab(t, a, 2*time.Minute)
	tb.signIn(cohort.Coordinator)
	tb.open(fmt.Sprintf("/participants/%d", f.pid), "#note")
	tb.b.Do("write a note", chromedp.SetValue(chromedp.ID("note"), "Asked to be called after 5 pm."))
	tb.follow("save the note", `form[action$="/notes"] button[type="submit"]`, `[data-testid="note-saved"]`)
	if msg := tb.b.Text("saved", `[data-testid="note-saved"]`); msg != "Note saved." {
		t.Errorf("the notes say %q", msg)
	}
	if !strings.HasSuffix(tb.b.Location(), "#notes") || !tb.has("#notes") {
		t.Fatalf("after saving, the page is at %s, with an element #notes: %v", tb.b.Location(), tb.has("#notes"))
	}
	if in := tb.eval(`(() => { const r = document.getElementById('notes').getBoundingClientRect(); return r.top >= 0 && r.top < innerHeight })()`); in != "true" {
		t.Errorf("the notes are not in view after saving (scrolled to %s)", tb.eval(`String(scrollY)`))
	}
	if !strings.Contains(tb.b.Text("notes", `[data-testid="notes"]`), "Asked to be called after 5 pm.") {
		t.Error("the note saved is not listed")
	}
}

// TestImportThatStoredNothingIsNotDone: a file whose every row is refused
// stores nothing; its report, the import list and the overview say so in a
// warning, never a green "done".
func TestImportThatStoredNothingIsNotDone(t *testing.T) {
	a := newApp(t)
	a.exec(`INSERT INTO sites (code, name) VALUES ('AA', 'Site A')`)
	c := a.signIn(cohort.Coordinator)
	file := "study_id,time,kind,value,end_time\n" +
		"P-7,2026-03-03T08:00:00Z,heart_rate,70,\n" +
		"P-8,2026-03-03T08:05:00Z,heart_rate,71,\n"
	_, report := upload(t, a, c, "readings_csv", "nobody.csv", file)
	if byTestID(report, "import-accepted") != "0" || byTestID(report, "import-rejected") != "2" {
		t.Fatalf("the file stored %q and refused %q rows, want 0 and 2", byTestID(report, "import-accepted"), byTestID(report, "import-rejected"))
	}
	badge := regexp.MustCompile(`<span class="badge ([a-z]+)"[^>]*>([^<]*)<`)
	check := func(where, body string) {
		t.Helper()
		m := badge.FindStringSubmatch(body)
		if m == nil {
			t.Fatalf("%s: no status badge", where)
		}
		if m[1] == "ok" || m[2] == "done" || !strings.Contains(m[2], "nothing stored") {
			t.Errorf("%s: an import that stored nothing shows %q in tone %q", where, m[2], m[1])
		}
	}
	check("the report", report[strings.Index(report, "<h1"):])
	_, list := a.get(c, "/imports")
	check("the import list", section(list, "imports-table"))
	_, home := a.get(c, "/")
	check("the overview", section(home, "home-last-import"))
}

// countedWrongly finds a count of one with a plural noun: "1 weeks",
// "1 cases match", "1 other cases".
var countedWrongly = regexp.MustCompile(`\b1 (other )?(weeks|cases|days|participants|recordings|readings|rows|episodes|attempts|summaries|windows|values)\b`)

// TestCountedWordsAgree reads the pages where a count of one appears in the
// small demo with one case being worked (the participant filter's week
// choices, the case list filtered to that case, triage, the overview):
// a count of one takes the singular, and "1 case matches".
func TestCountedWordsAgree(t *testing.T) {
	a := newApp(t)
	newJourneyFixture(t, a)
	c := a.signIn(cohort.Coordinator)
	for _, path := range []string{"/participants", "/cases?state=open", "/cases?state=all", "/triage", "/"} {
		_, body := a.get(c, path)
		text := squash(stripTags(body))
		for _, m := range countedWrongly.FindAllString(text, -1) {
			t.Errorf("%s: %q", path, m)
		}
	}
	_, body := a.get(c, "/cases?state=open")
	if got := byTestID(body, "case-total"); got != "1 case matches." {
		t.Errorf("the case list filtered to one case says %q", got)
	}
}

// TestCaseFactsSayTheDueDayOnce: the case page names the due day once ("Tue
// 15 Dec 2026", not "Due: due Tue 15 Dec 2026") and shows no internal
// version counter.
func TestCaseFactsSayTheDueDayOnce(t *testing.T) {
	a := newApp(t)
	f := newJourneyFixture(t, a)
	_, body := a.get(a.signIn(cohort.Coordinator), fmt.Sprintf("/cases/%d", f.caseID))
	due := byTestID(body, "case-due")
	if due == "" || strings.HasPrefix(due, "due ") {
		t.Errorf("the case's due fact reads %q", due)
	}
	if !regexp.MustCompile(`^(today|overdue, was due )?((Mon|Tue|Wed|Thu|Fri|Sat|Sun) \d{1,2} [A-Z][a-z]{2} \d{4})?$`).MatchString(due) {
		t.Errorf("the case's due fact %q is not a day", due)
	}
	if strings.Contains(body, "<dt>Version</dt>") {
		t.Error("the case page shows its version counter")
	}
}

// TestPaperDefaultsToTheStudys: a study that prints on US Letter gets US
// Letter by default in the referral preview, the weekly report and the
// batch of summaries; a choice made for one printout still wins.
func TestPaperDefaultsToTheStudys(t *testing.T) {
	a := newApp(t)
	_, _, pids, cases := demoCanaries(t, a) // cases ready to refer: the exports page offers a batch
	var sid string
	for s := range pids {
		sid = s
		break
	}
	a.exec(`UPDATE study SET paper = 'a4'`)
	admin := a.signIn(cohort.Admin)
	_, page := a.get(admin, "/admin/study")
	form := url.Values{}
	for _, m := range regexp.MustCompile(`<(?:input|select|textarea)[^>]*name="([a-z_]+)"[^>]*?(?:value="([^"]*)")?[^>]*>`).FindAllStringSubmatch(page, -1) {
		form.Set(m[1], m[2])
	}
	// The form's current values, read as the page shows them.
	for _, k := range []string{"name", "time_zone", "contact_route", "enrolment_target", "follow_up_weeks", "first_contact_working_days", "max_attempts",
		"give_up_after_days", "recorder_send_within_days", "recording_back_within_days", "over_read_within_days", "refer_or_close_within_days", "episode_gap_weeks"} {
		m := regexp.MustCompile(`id="` + k + `"[^>]*value="([^"]*)"`).FindStringSubmatch(page)
		if m == nil {
			t.Fatalf("settings form: no %s", k)
		}
		form.Set(k, m[1])
	}
	form.Set("closure_days", "")
	form.Set("paper", "letter")
	if res := a.postForm(admin, "/admin/study", form); res.StatusCode != 303 {
		t.Fatalf("save the study's paper: status %d", res.StatusCode)
	}
	coord := a.signIn(cohort.Coordinator)
	selected := regexp.MustCompile(`<option value="(a4|letter)" selected`)
	for _, path := range []string{fmt.Sprintf("/participants/%d/referral?case=%d", pids[sid], cases[sid]), "/progress/report", "/exports"} {
		_, body := a.get(coord, path)
		m := selected.FindStringSubmatch(body)
		if m == nil || m[1] != "letter" {
			t.Errorf("%s: the paper chosen first is %v, want the study's US Letter", path, m)
		}
	}
	_, body := a.get(coord, "/progress/report?paper=a4")
	if m := selected.FindStringSubmatch(body); m == nil || m[1] != "a4" {
		t.Errorf("a printout's own choice of A4 is not kept: %v", m)
	}
}

// TestOneAgeBandOnEveryPage: a participant aged 62 is in the same band on the
// participant list, their page and their referral summary: the one set of
// bands (deid.AgeCuts).
func TestOneAgeBandOnEveryPage(t *testing.T) {
	a := newApp(t)
	f := newJourneyFixture(t, a)
	p, err := a.store.Participant(context.Background(), f.pid)
	if err != nil {
		t.Fatal(err)
	}
	// Born 62 and a half years ago; aged 61 or 62 at enrolment, 62 now,
	// however the anniversaries fall: the band is 60-64 either way.
	birth := cohort.DateOf(time.Now()).AddDays(-(62*365 + 15 + 182))
	age, err := deid.AgeAt(birth, p.EnrolledOn)
	if err != nil {
		t.Fatal(err)
	}
	a.exec(`UPDATE participant_identity SET birth_date = $2 WHERE participant_id = $1`, f.pid, birth.String())
	a.exec(`UPDATE participants SET age_at_enrolment = $2 WHERE id = $1`, f.pid, age)
	c := a.signIn(cohort.Coordinator)
	_, list := a.get(c, "/participants?q="+url.QueryEscape(f.sid))
	_, page := a.get(c, fmt.Sprintf("/participants/%d", f.pid))
	_, summary := a.get(c, fmt.Sprintf("/participants/%d/referral?case=%d", f.pid, f.caseID))
	bands := map[string]bool{}
	for name, body := range map[string]string{"list": list, "participant page": page, "referral summary": summary} {
		text := squash(stripTags(body))
		found := regexp.MustCompile(`(<50|\d{2}-\d{2}|90 or older|\d{2}\+)`).FindAllString(text[strings.Index(text, "Age band"):], 1)
		if len(found) == 0 {
			t.Errorf("%s: no age band", name)
			continue
		}
		bands[found[0]] = true
		if found[0] != "60-64" {
			t.Errorf("%s: age band %s, want 60-64", name, found[0])
		}
	}
	if len(bands) != 1 {
		t.Errorf("one person, several age bands: %v", bands)
	}
}

// TestRecentOverReadsNewestReadFirst: the confirmations page lists the latest
// readings by the day they were read, so a reading entered today for a
// recording read weeks ago sits among the readings of its day, not on top.
func TestRecentOverReadsNewestReadFirst(t *testing.T) {
	a := newApp(t)
	_, _, pids, cases := demoCanaries(t, a)
	sids := slices.Sorted(func(yield func(string) bool) {
		for sid := range pids {
			if !yield(sid) {
				return
			}
		}
	})
	sid := sids[0]
	var rec int64
	if err := a.store.Pool().QueryRow(context.Background(), `SELECT id FROM recordings WHERE case_id = $1`, cases[sid]).Scan(&rec); err != nil {
		t.Fatal(err)
	}
	// A second reading entered now, read on a day before every other reading.
	a.exec(`INSERT INTO over_reads (recording_id, case_id, participant_id, role, rhythm, reader, read_on)
		VALUES ($1, $2, $3, 'second', 'af', 'Late reader', (SELECT min(read_on) - 10 FROM over_reads))`, rec, cases[sid], pids[sid])
	_, body := a.get(a.signIn(cohort.Investigator), "/confirmations")
	table := section(body, "recent-table")
	var days []time.Time
	for _, m := range regexp.MustCompile(`\b(\d{1,2} [A-Z][a-z]{2} \d{4})\b`).FindAllStringSubmatch(stripTags(table), -1) {
		d, err := time.Parse(cohort.DateLayout, m[1])
		if err != nil {
			t.Fatal(err)
		}
		days = append(days, d)
	}
	if len(days) < 4 {
		t.Fatalf("%d reading days in the recent list, want at least 4", len(days))
	}
	for i := 1; i < len(days); i++ {
		if days[i].After(days[i-1]) {
			t.Errorf("recent readings out of order: %s listed before %s", days[i-1].Format(cohort.DateLayout), days[i].Format(cohort.DateLayout))
		}
	}
}

// TestCaseTimelineInEventOrder: the case timeline lists what happened in the
// order it happened: a reading entered today for a recording read days ago
// comes after (below) a contact attempt made since, not on top.
func TestCaseTimelineInEventOrder(t *testing.T) {
	a := newApp(t)
	_, _, pids, cases := demoCanaries(t, a)
	var sid string
	for s := range pids {
		sid = s
		break
	}
	// The demo's reading was read 130 hours after the flag; an attempt
	// made 200 hours after it happened later than the reading, though the
	// reading is entered after it.
	var readOn time.Time
	if err := a.store.Pool().QueryRow(context.Background(), `SELECT read_on FROM over_reads WHERE case_id = $1`, cases[sid]).Scan(&readOn); err != nil {
		t.Fatal(err)
	}
	a.exec(`DELETE FROM over_reads WHERE case_id = $1`, cases[sid])
	a.exec(`INSERT INTO contact_attempts (case_id, participant_id, at, channel, outcome, note)
		SELECT $1, $2, flagged_at + interval '200 hours', 'phone', 'reached', 'asked how the recording went' FROM cases WHERE id = $1`, cases[sid], pids[sid])
	a.exec(`INSERT INTO over_reads (recording_id, case_id, participant_id, role, rhythm, reader, read_on)
		SELECT id, case_id, participant_id, 'first', 'af', 'Reader of record', $2 FROM recordings WHERE case_id = $1`, cases[sid], readOn)
	_, body := a.get(a.signIn(cohort.Coordinator), fmt.Sprintf("/cases/%d", cases[sid]))
	var kinds []string
	for _, m := range regexp.MustCompile(`<li class="ev-([a-z_]+)"`).FindAllStringSubmatch(section(body, "case-timeline"), -1) {
		kinds = append(kinds, m[1])
	}
	want := []string{"attempt", "over_read", "recording", "attempt"}
	if !slices.Equal(kinds, want) {
		t.Errorf("timeline %v, want %v (newest first, by when each happened)", kinds, want)
	}
}
