package web

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
	"time"

	"cohortdesk/cmd/cohortdesk/demoload"
	"cohortdesk/cohort"
	"cohortdesk/cohort/deid"
	"cohortdesk/cohort/demo"
	"cohortdesk/cohort/ecg"
	"cohortdesk/cohort/ecg/ecgtest"
	"cohortdesk/cohort/overread"
	"cohortdesk/views/components"
	"cohortdesk/web/browsertest"

	"github.com/chromedp/cdproto/page"
	"github.com/chromedp/chromedp"
)

// TestBrowserNavigationByRole signs in through the form as each role and
// reads the navigation the browser shows: each role sees the areas it may
// open and no other, its name and role in the header, and a page its role
// may not open answers with the "Not allowed" page and status 403. A
// visitor asking for a page is sent to the sign-in form.
//
// The expected areas are written out here from the roles of the domain
// notes (a monitor has a read-only, de-identified view of progress and case
// handling; administration is the administrators'), not read from the route
// table, so a change to the table that opens an area to a role fails here.
func TestBrowserNavigationByRole(t *testing.T) {
	a := newApp(t)
	tb := newTab(t, a, 3*time.Minute)

	tb.open("/triage", "#email")
	if loc := tb.b.Location(); !strings.Contains(loc, "/signin") || !strings.Contains(loc, "next=%2Ftriage") {
		t.Errorf("a visitor asking for triage is at %s, want the sign-in form that returns to triage", loc)
	}

	work := []string{"home", "triage", "participants", "screening", "cases", "confirmations", "progress", "exports"}
	for _, tt := range []struct {
		role      cohort.Role
		nav       []string
		forbidden string // a page the role may not open
	}{
		{cohort.Coordinator, work, "/admin/users"},
		{cohort.Investigator, work, "/admin"},
		{cohort.Monitor, []string{"home", "participants", "cases", "confirmations", "progress"}, "/triage"},
		{cohort.Admin, append(slices.Clone(work), "admin"), "/referrals/new"},
	} {
		tb.signIn(tt.role)
		var got []string
		for _, id := range strings.Split(tb.eval(`Array.from(document.querySelectorAll('nav.areas a')).map(a => a.dataset.testid).join(' ')`), " ") {
			got = append(got, strings.TrimPrefix(id, "nav-"))
		}
		if !slices.Equal(got, tt.nav) {
			t.Errorf("%s sees the areas %v, want %v", tt.role, got, tt.nav)
		}
		if who := tb.b.Text("header", `[data-testid="user-name"]`) + " / " + tb.b.Text("role", `[data-testid="user-role"]`); who != "Test "+tt.role.Label()+" / "+tt.role.Label() {
			t.Errorf("%s: header shows %q", tt.role, who)
		}
		// Every area offered opens (as a person would: by its link).
		for _, area := range got {
			tb.follow(tt.role.Label()+" opens "+area, `[data-testid="nav-`+area+`"]`, `[data-testid="nav-`+area+`"][aria-current="page"]`)
			if st := tb.status(); st != 200 {
				t.Errorf("%s: area %s answers %d", tt.role, area, st)
			}
		}
		tb.open(tt.forbidden, `[data-testid="error-heading"]`)
		if st, h := tb.status(), tb.b.Text("heading", `[data-testid="error-heading"]`); st != 403 || h != "Not allowed" {
			t.Errorf("%s at %s: status %d, heading %q; want 403 and the not-allowed page", tt.role, tt.forbidden, st, h)
		}
		if !tb.has(`[data-testid="nav-home"]`) {
			t.Errorf("%s: the not-allowed page has no navigation back", tt.role)
		}
	}
	tb.signOut()
}

// journeyFixture is the demo study with one more flag: a canary participant
// the demo left without a case gets a positive screening week (the week its
// own stored result found most irregular), and the case sync opens a case,
// as the screening job does after a run.
type journeyFixture struct {
	study    demoload.Result
	sid      string // the participant's study ID
	pid      int64
	caseID   int64
	name     string // canary values of this participant, typed into free text
	phone    string
	birth    string
	canaries []string // every canary value of the demo, study IDs included
}

func newJourneyFixture(t *testing.T, a *app) journeyFixture {
	t.Helper()
	ctx := context.Background()
	f := journeyFixture{study: loadDemo(t, a, 24)}
	for _, sid := range canaryStudyIDs(f.study) {
		p, err := a.store.ParticipantByStudyID(ctx, sid)
		if err != nil {
			t.Fatal(err)
		}
		var n int
		if err := a.store.Pool().QueryRow(ctx, `SELECT count(*) FROM cases WHERE participant_id = $1`, p.ID).Scan(&n); err != nil {
			t.Fatal(err)
		}
		if n == 0 {
			f.sid, f.pid = sid, p.ID
			break
		}
	}
	if f.pid == 0 {
		t.Fatal("every canary participant of the small demo has a case; the journey needs one without")
	}
	for _, c := range f.study.Study.CanaryValues() {
		f.canaries = append(f.canaries, c.Value)
		if c.StudyID != f.sid {
			continue
		}
		switch c.Field {
		case "full_name":
			f.name = c.Value
		case "phone":
			f.phone = c.Value
		case "birth_date":
			f.birth = c.Value
		}
	}
	proto := protocolFor(t, a)
	var week int
	err := a.store.Pool().QueryRow(ctx, `
		SELECT week FROM screen_results WHERE participant_id = $1 AND protocol_id = $2
		ORDER BY (SELECT max((w->>'share')::float8) FROM json_array_elements(result->'windows') w) DESC NULLS LAST, week DESC
		LIMIT 1`, f.pid, proto).Scan(&week)
	if err != nil {
		t.Fatalf("the canary participant has no screened week: %v", err)
	}
	a.exec(`UPDATE screen_results SET verdict = 'positive', reason = 'irregular windows above the limit'
		WHERE participant_id = $1 AND protocol_id = $2 AND week = $3`, f.pid, proto, week)
	opened, _, err := a.store.SyncCases(ctx, cohort.System, proto, []int64{f.pid})
	if err != nil || opened != 1 {
		t.Fatalf("case sync opened %d cases (%v), want 1", opened, err)
	}
	if err := a.store.Pool().QueryRow(ctx, `SELECT id FROM cases WHERE participant_id = $1`, f.pid).Scan(&f.caseID); err != nil {
		t.Fatal(err)
	}
	return f
}

// afRecordingFile writes an EDF+ file of a synthetic ECG in atrial
// fibrillation, at least 30 s long (the minimum the cautions name), whose
// patient field identifies the participant the way a recorder would: the
// application must drop it.
func afRecordingFile(t *testing.T, f journeyFixture) string {
	t.Helper()
	syn, err := ecg.Synthesize(ecgtest.AFRR(64, 640, 23), ecg.SynthOptions{RateHz: 250})
	if err != nil {
		t.Fatal(err)
	}
	if s := syn.Waveform.Seconds(); s < 30 {
		t.Fatalf("synthetic recording of %.1f s, want at least 30 s", s)
	}
	birth, err := time.Parse("2006-01-02", f.birth)
	if err != nil {
		t.Fatalf("canary birth date %q: %v", f.birth, err)
	}
	// EDF+ patient field: code, sex, birth date as dd-MMM-yyyy, name with
	// underscores for spaces (EDF+ specification, section 2.1.3.3; from
	// memory).
	patient := fmt.Sprintf("%s X %s %s", f.sid, strings.ToUpper(birth.Format("02-Jan-2006")), strings.ReplaceAll(f.name, " ", "_"))
	data, err := ecgtest.EncodeEDF(syn.Waveform, ecgtest.EDFWriteOptions{Plus: true, Patient: patient})
	if err != nil {
		t.Fatal(err)
	}
	file := filepath.Join(t.TempDir(), "returned-recorder.edf")
	if err := os.WriteFile(file, data, 0o600); err != nil {
		t.Fatal(err)
	}
	return file
}

// TestBrowserJourneyFromFlagToSignedOffReferral follows one flag through
// the real pages in headless Chromium. The demo study is loaded and one of
// its canary participants gets a positive screening week. The coordinator
// finds the new case on triage, takes it, logs a call that reaches the
// participant, marks the recorder sent, writes a note and uploads the
// returned recording (an EDF+ file of a synthetic AF ECG). The
// investigator opens the recording (strip drawn, the cautions beside the
// over-read form), enters an AF over-read, issues the summary from the
// exports page and signs it off; the case is then referred. The issued
// summary printed to PDF by the browser holds the referral code and every
// caution and none of the demo's canary values, although the participant's
// name, phone and birth date were typed into the note, the over-read
// comment and the EDF header on the way.
func TestBrowserJourneyFromFlagToSignedOffReferral(t *testing.T) {
	a := newApp(t)
	f := newJourneyFixture(t, a)
	file := afRecordingFile(t, f)
	ctx := context.Background()
	tb := newTab(t, a, 5*time.Minute)
	b := tb.b
	row := fmt.Sprintf("#case-%d", f.caseID)

	// Coordinator: triage, take, call, ship.
	tb.signIn(cohort.Coordinator)
	tb.follow("triage lists the new flag", `[data-testid="nav-triage"]`, `[data-testid="group-new"] `+row)
	if got := b.Text("study ID on the row", row+` a[data-row-focus]`); got != f.sid {
		t.Fatalf("the new case's row shows %q, want %s", got, f.sid)
	}
	b.Do("take the case",
		chromedp.Click(chromedp.CSS(row+` [data-testid="take"] button`)),
		chromedp.WaitVisible(chromedp.CSS(row+` [data-testid="row-done"]`)),
	)
	if got := b.Text("owner", row+` [data-testid="row-owner"]`); got != "Test Coordinator" {
		t.Fatalf("owner after taking the case %q", got)
	}
	// Each one-step action answers with the board, swapped in by htmx:
	// wait for it to settle before the next, so typed keys reach the
	// field, not the page (where digits open areas).
	b.Do("log a call that reaches the participant", browsertest.HTMXSettled(),
		chromedp.SetValue(chromedp.ID(fmt.Sprintf("channel-%d", f.caseID)), "phone"),
		chromedp.SetValue(chromedp.ID(fmt.Sprintf("outcome-%d", f.caseID)), "reached"),
		chromedp.Click(chromedp.CSS(row+` [data-testid="attempt"] button`)),
		chromedp.WaitVisible(chromedp.CSS(row+` [data-testid="ship"]`)),
	)
	b.Do("mark the recorder sent", browsertest.HTMXSettled(),
		chromedp.SendKeys(chromedp.ID(fmt.Sprintf("tracking-%d", f.caseID)), "TRK-4410"),
		chromedp.Click(chromedp.CSS(row+` [data-testid="ship"] button`)),
		chromedp.WaitVisible(chromedp.CSS(`tr[data-state="recorder sent"]`+row)), browsertest.HTMXSettled(),
	)

	// Coordinator: the case page, a note with identifying text, the upload.
	tb.follow("open the case page", row+` a[data-row-focus]`, `[data-testid="form-recording"]`)
	b.Do("write a note", chromedp.SetValue(chromedp.ID("note"), "Call back on "+f.phone+", ask for "+f.name))
	tb.follow("save the note", `[data-testid="form-note"] button`, `[data-testid="case-flash"]`)
	c, err := a.store.Case(ctx, f.caseID)
	if err != nil {
		t.Fatal(err)
	}
	st, err := a.store.StudySettings(ctx)
	if err != nil {
		t.Fatal(err)
	}
	// Taken on the day of the flag (the intake refuses earlier days and
	// future times); the form takes minutes in the study's time zone.
	taken := c.FlaggedAt.In(st.Location()).Format("2006-01-02T15:04")
	b.Do("upload the returned recording",
		chromedp.SetUploadFiles(chromedp.ID("waveform"), []string{file}),
		chromedp.SetValue(chromedp.ID("auto"), string(overread.AutoSuggestsAF)),
		chromedp.SetValue(chromedp.ID("taken_at"), taken),
		chromedp.Click(chromedp.CSS(`[data-testid="add-recording"]`)),
		chromedp.WaitVisible(chromedp.CSS(`[data-testid="recording-flash"]`)),
	)
	if msg := b.Text("flash", `[data-testid="recording-flash"]`); msg != "Recording stored." {
		t.Fatalf("after the upload: %q", msg)
	}
	var recID int64
	if _, err := fmt.Sscanf(b.Location(), a.ts.URL+"/recordings/%d", &recID); err != nil {
		t.Fatalf("after the upload the browser is at %s: %v", b.Location(), err)
	}
	tb.signOut()

	// Investigator: the recording page, the over-read.
	tb.signIn(cohort.Investigator)
	rec := fmt.Sprintf(`a[href="/recordings/%d"]`, recID)
	tb.follow("the recording waits for an over-read", `[data-testid="nav-confirmations"]`, `[data-testid="unread-table"] `+rec)
	tb.follow("open the recording", `[data-testid="unread-table"] `+rec, `[data-testid="form-over-read"]`)
	b.Do("the strip is drawn", chromedp.WaitVisible(chromedp.CSS(`figure.strip svg`)))
	if got := b.Text("study ID", `[data-testid="recording-study-id"]`); got != f.sid {
		t.Errorf("recording of %q, want %s", got, f.sid)
	}
	if text := tb.visibleText(); strings.Contains(text, f.name) || strings.Contains(text, strings.ReplaceAll(f.name, " ", "_")) {
		t.Error("the recording page shows the name from the EDF header")
	}
	cautions := b.Text("cautions", `.cols [data-testid="cautions"]`)
	for _, item := range components.CautionItems {
		if !strings.Contains(cautions, item) {
			t.Errorf("the cautions beside the over-read form lack %q", item)
		}
	}
	// Beside: the form and the cautions share a row of the page.
	if side := tb.eval(`(() => {
		const f = document.querySelector('[data-testid="form-over-read"]').getBoundingClientRect();
		const c = document.querySelector('.cols [data-testid="cautions"]').getBoundingClientRect();
		return c.left >= f.right - 1 && c.top < f.bottom && f.top < c.bottom;
	})()`); side != "true" {
		t.Error("the cautions are not beside the over-read form")
	}
	b.Do("choose AF",
		chromedp.Click(chromedp.CSS(`input[name="rhythm"][value="af"]`)),
		chromedp.SetValue(chromedp.ID("confidence"), "certain"),
		chromedp.SetValue(chromedp.ID("comment"), "Irregularly irregular; the participant ("+f.phone+") was told."),
	)
	tb.follow("enter the over-read", `[data-testid="enter-over-read"]`, `[data-testid="readings"]`)
	if v := b.Text("verdict", `[data-testid="recording-verdict"]`); v != overread.AF.Label() {
		t.Fatalf("verdict after the over-read %q", v)
	}

	// Investigator: issue the summary from the exports page, sign it off,
	// counting the clicks (issue 19: eight before issuing led to the
	// sign-off and it asked twice).
	clicks := 0
	summary := fmt.Sprintf(`[data-testid="ready-table"] a[href="/participants/%d/referral?case=%d"]`, f.pid, f.caseID)
	tb.follow("the case is due a summary", `[data-testid="nav-exports"]`, summary)
	tb.follow("preview the summary", summary, `[data-testid="preview-mark"]`)
	tb.follow("issue the summary: its record, a draft, with the sign-off", `[data-testid="issue-referral"]`, `[data-testid="form-signoff"]`)
	clicks += 3
	if !tb.has(`[data-testid="draft-mark"]`) {
		t.Error("the issued summary is not marked as a draft before its sign-off")
	}
	refURL := b.Location()
	code := deid.Code([]byte(testSecret), f.sid)
	if got := b.Text("code", `[data-testid="referral-code"]`); got != code {
		t.Errorf("referral code %q, want %q", got, code)
	}
	if got := b.Text("digest check", `[data-testid="digest-check"]`); got != "content as issued" {
		t.Errorf("digest check %q", got)
	}
	b.Do("tick the review box", chromedp.Click(chromedp.CSS(`[data-testid="form-signoff"] input[name="reviewed"]`)))
	tb.follow("sign it off", `[data-testid="sign-off"]`, `[data-testid="signed-mark"]`)
	clicks += 2
	t.Logf("sign off a referral: %d clicks from the exports link", clicks)
	if clicks != 5 {
		t.Errorf("signing off took %d clicks, want 5", clicks)
	}
	if tb.has(`[data-testid="form-signoff"]`) {
		t.Fatal("the sign-off form is still offered after the sign-off")
	}
	if got := tb.confirmed(); len(got) != 0 {
		t.Errorf("confirmation dialogs %q beside the review box: the sign-off asks twice", got)
	}
	if got := b.Text("sign-off", `[data-testid="signoff-state"]`); !strings.Contains(got, "Test Investigator") {
		t.Errorf("sign-off shown as %q", got)
	}
	if got := b.Text("signed mark", `[data-testid="signed-mark"]`); !strings.Contains(got, "Signed off by Test Investigator") || tb.has(`[data-testid="draft-mark"]`) {
		t.Errorf("the signed summary shows %q", got)
	}
	tb.follow("back to the case", fmt.Sprintf(`[data-testid="referral-tools"] a[href="/cases/%d"]`, f.caseID), `[data-testid="case-state"]`)
	if got := b.Text("case state", `[data-testid="case-state"]`); got != "referred" {
		t.Errorf("case state after the sign-off %q, want referred", got)
	}
	if c, _ := a.store.Case(ctx, f.caseID); c.State != "referred" {
		t.Errorf("stored case state %s", c.State)
	}

	// The issued summary, printed by the browser.
	b.Do("open the issued summary", chromedp.Navigate(refURL), chromedp.WaitVisible(chromedp.CSS(`[data-testid="referral-doc"]`)))
	pdf, err := chromedp.Run(b.Context(), chromedp.PrintToPDF(func(p *page.PrintToPDFParams) {
		yes := true
		p.PreferCSSPageSize = &yes
		p.PrintBackground = &yes
	}))
	if err != nil {
		t.Fatalf("print to PDF: %v", err)
	}
	text := pdfText(t, pdf)
	if !strings.Contains(text, code) {
		t.Errorf("the printout lacks the referral code %s", code)
	}
	for _, item := range components.CautionItems {
		if !containsWrapped(text, item) {
			t.Errorf("the printout lacks the caution %q", item)
		}
	}
	if containsWrapped(text, "Preview, not issued") || strings.Contains(text, "Sign off") {
		t.Error("the printout of the issued summary carries the preview mark or the sign-off form")
	}
	if leaks := leaksIn(text, f.canaries); len(leaks) > 0 {
		t.Errorf("the printout leaks %v", leaks)
	}
	if os.Getenv("COHORTDESK_KEEP_PRINT") != "" {
		os.WriteFile(filepath.Join(os.TempDir(), "journey-referral.pdf"), pdf, 0o644)
	}
}

// TestBrowserMonitorSeesNoPHI signs a monitor in and visits the main pages
// and every canary participant's page of the demo, with a week's heart-rate
// chart drawn, as the browser renders them. The canaries' cases hold their
// names and phones in free text, and notes and a withdrawal reason planted on
// top repeat name, phone, birth date, street and ZIP (plantMonitorFixture):
// neither the rendered text nor the page's markup (the chart's options and
// the SVG it draws included) holds any canary value, the planted free text
// or a participant's calendar date in any common form. Study IDs are not
// counted: monitors work by study ID. The same visit as a coordinator does
// find the canary's name, the free text and the dates, so the check can see
// a leak.
func TestBrowserMonitorSeesNoPHI(t *testing.T) {
	a := newApp(t)
	f := plantMonitorFixture(t, a)
	tb := newTab(t, a, 3*time.Minute)
	pages := []string{"/", "/participants", "/participants?sort=enrolled", "/cases", "/confirmations", "/confirmations/statistics", "/progress", "/progress/report"}
	sids := make([]string, 0, len(f.pids))
	for sid := range f.pids {
		sids = append(sids, sid)
	}
	slices.Sort(sids)
	for _, sid := range sids {
		pages = append(pages, fmt.Sprintf("/participants/%d", f.pids[sid]), fmt.Sprintf("/participants/%d?week=2", f.pids[sid]))
	}

	tb.signIn(cohort.Monitor)
	for _, p := range pages {
		tb.open(p, "main")
		if st := tb.status(); st != 200 {
			t.Errorf("monitor at %s: status %d", p, st)
		}
		text, markup := tb.visibleText(), tb.markup()
		if leaks := leaksIn(text, f.canaries); len(leaks) > 0 {
			t.Errorf("monitor sees PHI or staff free text on %s: %v", p, leaks)
		}
		if leaks := leaksIn(markup, f.canaries); len(leaks) > 0 {
			t.Errorf("the markup sent to a monitor on %s holds PHI or staff free text: %v", p, leaks)
		}
		for _, page := range []string{text, markup} {
			if leaks := dateLeaks(page, "", f.today); len(leaks) > 0 {
				t.Errorf("monitor sees participants' dates on %s: %v", p, leaks[:min(len(leaks), 5)])
			}
		}
	}
	if tb.has(`[data-testid="nav-triage"]`) {
		t.Error("a monitor is offered triage")
	}

	tb.signIn(cohort.Coordinator)
	tb.open(fmt.Sprintf("/participants/%d?week=2", f.pids[sids[0]]), "main")
	text, markup := tb.visibleText(), tb.markup()
	if len(leaksIn(text, f.canaries)) == 0 || !strings.Contains(text, freeTextMarker) || len(dateLeaks(text, "", f.today)) == 0 ||
		len(dateLeaks(markup, "", f.today)) == 0 {
		t.Fatal("a coordinator sees no canary value, free text or date on a canary's page either: the check cannot tell a leak")
	}
}

// monitorCanaries are the demo's canary values that are PHI inside the
// application: all but the study IDs.
func monitorCanaries(study *demo.Study) []string {
	var out []string
	for _, c := range study.CanaryValues() {
		if c.HiddenFromMonitors() {
			out = append(out, c.Value)
		}
	}
	return out
}
