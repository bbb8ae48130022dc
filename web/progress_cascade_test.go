package web

import (
	"context"
	"fmt"
	"html"
	"math"
	"net/http"
	"net/http/httptest"
	"regexp"
	"slices"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/credential"
	"cohortdesk/db"
	"cohortdesk/db/dbtest"

	"gonum.org/v1/gonum/stat/distuv"
)

// newAppAt is newApp with the server's and the store's clock stopped at now,
// so dates on the pages can be worked out by hand.
func newAppAt(t *testing.T, now time.Time) *app {
	t.Helper()
	pool := dbtest.Pool(t)
	clock := func() time.Time { return now }
	store := db.New(pool, clock)
	srv := New(Config{Store: store, Pool: pool, Password: credential.TestParams, Secret: []byte(testSecret), Now: clock})
	a := &app{t: t, store: store, srv: srv, users: map[cohort.Role]db.User{}}
	a.ts = httptest.NewServer(srv.Handler())
	t.Cleanup(a.ts.Close)
	a.addRoleUsers()
	return a
}

// byTestID is the text of the first element carrying data-testid="id", with
// tags inside it removed and white space squashed; "" when there is none.
func byTestID(body, id string) string {
	re := regexp.MustCompile(`data-testid="` + regexp.QuoteMeta(id) + `"[^>]*>`)
	loc := re.FindStringIndex(body)
	if loc == nil {
		return ""
	}
	rest := body[loc[1]:]
	// The element ends at the first closing tag that balances it; the
	// elements tests read hold inline content only, so the first closing
	// tag of the same depth is found by counting.
	depth := 0
	tag := regexp.MustCompile(`<(/?)([a-zA-Z0-9]+)[^>]*?(/?)>`)
	for _, m := range tag.FindAllStringSubmatchIndex(rest, -1) {
		closing := rest[m[2]:m[3]] == "/"
		selfClosing := rest[m[6]:m[7]] == "/" || isVoid(rest[m[4]:m[5]])
		switch {
		case closing && depth == 0:
			return squash(stripTags(rest[:m[0]]))
		case closing:
			depth--
		case !selfClosing:
			depth++
		}
	}
	return ""
}

func isVoid(tag string) bool {
	switch strings.ToLower(tag) {
	case "br", "input", "img", "hr", "meta", "link":
		return true
	}
	return false
}

var tagRE = regexp.MustCompile(`<[^>]*>`)

func stripTags(s string) string { return html.UnescapeString(tagRE.ReplaceAllString(s, " ")) }

func squash(s string) string { return strings.Join(strings.Fields(s), " ") }

// testIDs lists every data-testid with the prefix, in page order.
func testIDs(body, prefix string) []string {
	var out []string
	for _, m := range regexp.MustCompile(`data-testid="(`+regexp.QuoteMeta(prefix)+`[^"]*)"`).FindAllStringSubmatch(body, -1) {
		out = append(out, m[1])
	}
	return out
}

// section is the part of body from the element with data-testid="id" on.
func section(body, id string) string {
	i := strings.Index(body, `data-testid="`+id+`"`)
	if i < 0 {
		return ""
	}
	return body[i:]
}

// TestProjectionWorkedExamplesThroughThePage checks the projected dates on
// the progress page against arithmetic done by hand. The clock stands at
// Wednesday 2026-03-11, so a calendar week is under way: the rate must come
// from the last whole seven-day periods, not from calendar weeks.
func TestProjectionWorkedExamplesThroughThePage(t *testing.T) {
	now := time.Date(2026, 3, 11, 12, 0, 0, 0, time.UTC)
	// The exact 95% interval of a Poisson count of 12 is 6.2006 to 20.9617
	// events (from memory: the standard Poisson tables; checked here against
	// gonum's chi-square quantiles, the reference library, as
	// chi2(0.025; 24)/2 and chi2(0.975; 26)/2).
	lo := distuv.ChiSquared{K: 24}.Quantile(0.025) / 2
	hi := distuv.ChiSquared{K: 26}.Quantile(0.975) / 2
	if math.Abs(lo-6.2006) > 1e-3 || math.Abs(hi-20.9617) > 1e-3 {
		t.Fatalf("reference interval %.4f-%.4f", lo, hi)
	}
	// Over 4 weeks the rate's interval is 1.55 to 5.24 a week: the 30
	// remaining take ceil(30/5.24) = 6 weeks at best (2026-04-22) and
	// ceil(30/1.55) = 20 weeks at worst (2026-07-29).
	fast, slow := math.Ceil(30/(hi/4)), math.Ceil(30/(lo/4))
	if fast != 6 || slow != 20 {
		t.Fatalf("hand arithmetic: %v and %v weeks", fast, slow)
	}
	tests := []struct {
		name   string
		setup  []string
		window string
		site   string
		// want, worked by hand in the comment of each case
		rate, projection, rng string
	}{
		{
			// Site AA: 18 enrolled long ago (day -60) and 3 in each of the
			// last four seven-day periods (days -1, -8, -15, -22): 30
			// enrolled, target 60, so 30 remain. Rate = 12 / 4 weeks = 3.0
			// a week; 30 / 3 = 10 weeks; 2026-03-11 + 70 days = 2026-05-20.
			name: "12 in the last 4 weeks, 30 to go",
			setup: []string{
				`INSERT INTO sites (code, name, target) VALUES ('AA', 'Site A', 60)`,
				`INSERT INTO participants (study_id, site_id, time_zone, enrolled_on) SELECT 'A-OLD-' || g, 1, 'UTC', date '2026-03-11' - 60 FROM generate_series(1, 18) g`,
				`INSERT INTO participants (study_id, site_id, time_zone, enrolled_on) SELECT 'A-NEW-' || g, 1, 'UTC', date '2026-03-11' - (1 + 7 * (g % 4)) FROM generate_series(1, 12) g`,
			},
			window: "4", site: "AA",
			rate: "3.0 a week (95% CI 1.6–5.2) over 4 weeks", projection: "20 May 2026", rng: "22 Apr 2026 to 29 Jul 2026",
		},
		{
			// A study nine days old: 6 enrolled on days -9 (the first
			// enrolment), -8, -3, -2, -1 and 0. Only two seven-day periods
			// reach back to the first enrolment (days -13..-7 and -6..0), so
			// an 8-week window shrinks to 2 weeks: 6 / 2 = 3.0 a week;
			// target 36, 30 remain: 10 weeks, 2026-05-20 again. Counting
			// eight weeks would give 0.75 a week and 40 weeks.
			name: "younger study than the window",
			setup: []string{
				`INSERT INTO sites (code, name, target) VALUES ('CC', 'Site C', 36)`,
				`INSERT INTO participants (study_id, site_id, time_zone, enrolled_on) SELECT 'C-' || g, 1, 'UTC', date '2026-03-11' - d FROM unnest(ARRAY[9, 8, 3, 2, 1, 0]) WITH ORDINALITY AS x(d, g)`,
			},
			window: "8", site: "CC",
			rate: "3.0 a week (95% CI 1.1–6.5) over 2 weeks", projection: "20 May 2026",
		},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			a := newAppAt(t, now)
			for _, q := range tt.setup {
				a.exec(q)
			}
			res, body := a.get(a.signIn(cohort.Investigator), "/progress?window="+tt.window)
			if res.StatusCode != http.StatusOK {
				t.Fatalf("status %d", res.StatusCode)
			}
			row := section(body, "enrolment-"+tt.site)
			if got := byTestID(row, "rate"); got != tt.rate {
				t.Errorf("rate %q, want %q", got, tt.rate)
			}
			if got := byTestID(row, "projection"); got != tt.projection {
				t.Errorf("projected date %q, want %q", got, tt.projection)
			}
			if tt.rng != "" {
				if got := byTestID(row, "range"); got != tt.rng {
					t.Errorf("range %q, want %q", got, tt.rng)
				}
			}
		})
	}
}

// cascadeCohort builds eleven participants whose cascade is worked out by
// hand (protocol version 1 active; P1..P6 at site AA, P7..P11 at BB;
// P<n> enrolled on 2026-01-04 + n days):
//
//	P10 has only an "insufficient data" week; P9 withdrew with no result.
//	P8 has a negative week only. P7 has a positive week but no case yet.
//	P1..P6 and P11 have a positive week and a case each:
//	  P6 is being contacted; P5 declined before being reached;
//	  P4 was reached and sent a recorder, nothing back yet;
//	  P11 sent a 45 s recording nobody has read;
//	  P3's recording was read as sinus rhythm;
//	  P2's as AF (not referred yet); P1's as AF, and P1 was referred.
func cascadeCohort(t *testing.T, a *app) map[string]int64 {
	t.Helper()
	for _, q := range []string{
		`INSERT INTO sites (code, name, target) VALUES ('AA', 'Site A', 20), ('BB', 'Site B', 20)`,
		`INSERT INTO protocols (name, version, params, active, used) VALUES ('weekly screen', 1, '{}', true, true)`,
		`INSERT INTO participants (study_id, site_id, time_zone, enrolled_on, withdrawn_on, withdrawal_reason)
		 SELECT 'P' || g, CASE WHEN g <= 6 THEN 1 ELSE 2 END, 'UTC', date '2026-01-04' + g,
		        CASE WHEN g = 9 THEN date '2026-01-20' END, CASE WHEN g = 9 THEN 'moved away' ELSE '' END
		 FROM generate_series(1, 11) g`,
		`INSERT INTO screen_results (participant_id, protocol_id, week, verdict, reason, result, input_digest, wear_hours)
		 SELECT p.id, 1, v.week, v.verdict, 'test', '{}', 'd', 100 FROM participants p
		 JOIN (VALUES ('P1', 2, 'positive'), ('P2', 2, 'positive'), ('P3', 2, 'positive'), ('P4', 2, 'positive'), ('P5', 2, 'positive'),
		              ('P6', 2, 'positive'), ('P7', 2, 'positive'), ('P11', 2, 'positive'), ('P1', 1, 'negative'),
		              ('P8', 1, 'negative'), ('P10', 1, 'insufficient')) AS v(sid, week, verdict) ON v.sid = p.study_id`,
		`INSERT INTO cases (participant_id, protocol_id, first_week, last_week, state, flagged_at, reached_at, closed_at)
		 SELECT p.id, 1, 2, 2, v.state, timestamptz '2026-02-01 09:00Z',
		        CASE WHEN v.reached THEN timestamptz '2026-02-02 09:00Z' END,
		        CASE WHEN v.state IN ('referred', 'closed_declined') THEN timestamptz '2026-02-20 09:00Z' END
		 FROM participants p JOIN (VALUES ('P1', 'referred', true), ('P2', 'over_read', true), ('P3', 'over_read', true),
		      ('P4', 'recorder_sent', true), ('P5', 'closed_declined', false), ('P6', 'contacting', false),
		      ('P11', 'recording_received', true)) AS v(sid, state, reached) ON v.sid = p.study_id`,
		`INSERT INTO recordings (case_id, participant_id, taken_at, duration_s, auto_interpretation)
		 SELECT c.id, c.participant_id, timestamptz '2026-02-05 10:00Z', 45, 'suggests_af' FROM cases c JOIN participants p ON p.id = c.participant_id
		 WHERE p.study_id IN ('P1', 'P2', 'P3', 'P11')`,
		`INSERT INTO over_reads (recording_id, case_id, participant_id, role, rhythm, reader, read_on)
		 SELECT r.id, r.case_id, r.participant_id, 'first', v.rhythm, 'Reader One', date '2026-02-08'
		 FROM recordings r JOIN participants p ON p.id = r.participant_id
		 JOIN (VALUES ('P1', 'af'), ('P2', 'af'), ('P3', 'sinus')) AS v(sid, rhythm) ON v.sid = p.study_id`,
	} {
		a.exec(q)
	}
	ids := map[string]int64{}
	rows, err := a.store.Pool().Query(context.Background(), `SELECT study_id, id FROM participants`)
	if err != nil {
		t.Fatal(err)
	}
	defer rows.Close()
	for rows.Next() {
		var sid string
		var id int64
		if err := rows.Scan(&sid, &id); err != nil {
			t.Fatal(err)
		}
		ids[sid] = id
	}
	return ids
}

// cascadeWant is one box of a hand-worked cascade.
type cascadeWant struct {
	key          string
	participants int
	cases        int // -1: not shown (before the screen-positive box)
	exits        map[string]int
}

// checkFlow compares the diagram on a page with the hand-worked boxes: every
// count, every exit, and no exit more.
func checkFlow(t *testing.T, body string, want []cascadeWant) {
	t.Helper()
	var wantExits []string
	for _, w := range want {
		if got := byTestID(body, "cascade-count-"+w.key); got != fmt.Sprint(w.participants) {
			t.Errorf("box %s: %q participants, want %d", w.key, got, w.participants)
		}
		got := byTestID(body, "cascade-cases-"+w.key)
		if w.cases < 0 && got != "" || w.cases >= 0 && got != fmt.Sprint(w.cases) {
			t.Errorf("box %s: %q flagged episodes, want %d", w.key, got, w.cases)
		}
		for reason, n := range w.exits {
			id := "cascade-exit-" + w.key + "-" + reason
			wantExits = append(wantExits, id)
			if got := byTestID(body, id); got != fmt.Sprint(n) {
				t.Errorf("exit %s from %s: %q, want %d", reason, w.key, got, n)
			}
		}
	}
	got := testIDs(body, "cascade-exit-")
	slices.Sort(got)
	slices.Sort(wantExits)
	if !slices.Equal(got, wantExits) {
		t.Errorf("exits shown %v, want %v", got, wantExits)
	}
}

// TestCascadeOnAConstructedCohort draws the cascade of cascadeCohort on the
// progress page and checks every box and exit against the hand count, then
// the same for one site and for an enrolment period whose last day counts.
func TestCascadeOnAConstructedCohort(t *testing.T) {
	a := newAppAt(t, time.Date(2026, 3, 11, 12, 0, 0, 0, time.UTC))
	cascadeCohort(t, a)
	c := a.signIn(cohort.Monitor)
	res, body := a.get(c, "/progress")
	if res.StatusCode != http.StatusOK {
		t.Fatalf("status %d", res.StatusCode)
	}
	checkFlow(t, body, []cascadeWant{
		{"enrolled", 11, -1, map[string]int{"no_wear_data": 1, "withdrawn_early": 1}},
		{"sufficient_wear", 9, -1, map[string]int{"screen_negative": 1}},
		{"screen_positive", 8, 7, map[string]int{"no_case": 1, "contacting": 1, "declined": 1}},
		{"reached", 5, 5, map[string]int{"awaiting_recording": 1}},
		{"recording_returned", 4, 4, map[string]int{"awaiting_over_read": 1}},
		{"over_read", 3, 3, map[string]int{"not_confirmed_sinus": 1}},
		{"af_confirmed", 2, 2, map[string]int{"referral_pending": 1}},
		{"referred", 1, 1, nil},
	})
	// Final exits and waits are told apart: from screen-positive, P5
	// declined (left) while P6 and P7 are still on their way.
	if got, want := byTestID(body, "cascade-left-screen_positive"), "1"; got != want {
		t.Errorf("left screen-positive %q, want %s", got, want)
	}
	if got, want := byTestID(body, "cascade-waiting-screen_positive"), "2"; got != want {
		t.Errorf("waiting after screen-positive %q, want %s", got, want)
	}
	// 5 of the 8 screen-positive were reached: 62.5%.
	if got := byTestID(body, "cascade-share-reached"); got != "62.5% of the box above" {
		t.Errorf("share of reached %q", got)
	}

	// Site BB holds P7..P11: P9 and P10 leave at the first box, P8 is
	// negative, P7 has no case, and P11 waits for an over-read.
	_, body = a.get(c, "/progress?site=2")
	checkFlow(t, body, []cascadeWant{
		{"enrolled", 5, -1, map[string]int{"no_wear_data": 1, "withdrawn_early": 1}},
		{"sufficient_wear", 3, -1, map[string]int{"screen_negative": 1}},
		{"screen_positive", 2, 1, map[string]int{"no_case": 1}},
		{"reached", 1, 1, nil},
		{"recording_returned", 1, 1, map[string]int{"awaiting_over_read": 1}},
		{"over_read", 0, 0, nil},
		{"af_confirmed", 0, 0, nil},
		{"referred", 0, 0, nil},
	})

	// Enrolled 2026-01-06 to 2026-01-08, both days included: P2, P3, P4.
	_, body = a.get(c, "/progress?from=2026-01-06&to=2026-01-08")
	checkFlow(t, body, []cascadeWant{
		{"enrolled", 3, -1, nil},
		{"sufficient_wear", 3, -1, nil},
		{"screen_positive", 3, 3, nil},
		{"reached", 3, 3, map[string]int{"awaiting_recording": 1}},
		{"recording_returned", 2, 2, nil},
		{"over_read", 2, 2, map[string]int{"not_confirmed_sinus": 1}},
		{"af_confirmed", 1, 1, map[string]int{"referral_pending": 1}},
		{"referred", 0, 0, nil},
	})
}

// TestCascadeBoxListsItsParticipantsByRole opens boxes and exits of
// cascadeCohort: the right study IDs with what happened next; monitors get
// no dates and no links to case pages, coordinators get both; nobody gets
// names.
func TestCascadeBoxListsItsParticipantsByRole(t *testing.T) {
	a := newAppAt(t, time.Date(2026, 3, 11, 12, 0, 0, 0, time.UTC))
	cascadeCohort(t, a)
	a.exec(`INSERT INTO participant_identity (participant_id, given_name, family_name)
		SELECT id, 'Quillon', 'Marrowby' FROM participants WHERE study_id = 'P4'`)
	monitor, coord := a.signIn(cohort.Monitor), a.signIn(cohort.Coordinator)
	studyIDs := func(body string) []string {
		var out []string
		for _, m := range regexp.MustCompile(`data-testid="member-study-id"[^>]*>([^<]*)<`).FindAllStringSubmatch(body, -1) {
			out = append(out, m[1])
		}
		slices.Sort(out)
		return out
	}
	for _, c := range []*http.Client{monitor, coord} {
		res, body := a.get(c, "/progress/cascade/reached")
		if res.StatusCode != http.StatusOK {
			t.Fatalf("reached box: status %d", res.StatusCode)
		}
		if got, want := studyIDs(body), []string{"P1", "P11", "P2", "P3", "P4"}; !slices.Equal(got, want) {
			t.Errorf("reached box lists %v, want %v", got, want)
		}
		if got := byTestID(body, "box-listed"); got != "5" {
			t.Errorf("reached box counts %q", got)
		}
		if !strings.Contains(body, "recording not back yet") || !strings.Contains(body, "on to Recording returned") {
			t.Error("the list does not say what happened after the box")
		}
		if strings.Contains(body, "Quillon") || strings.Contains(body, "Marrowby") {
			t.Error("a box list shows a name")
		}
	}
	_, body := a.get(monitor, "/progress/cascade/reached")
	if strings.Contains(body, `href="/cases/`) || strings.Contains(body, "1 Feb 2026") || strings.Contains(body, "5 Jan 2026") || strings.Contains(body, "2026-02-01") || strings.Contains(body, "2026-01-05") {
		t.Error("the monitor's list shows case links or dates")
	}
	if byTestID(body, "deidentified-note") == "" {
		t.Error("the monitor's list does not say it is de-identified")
	}
	_, body = a.get(coord, "/progress/cascade/reached")
	if !strings.Contains(body, `href="/cases/`) || !strings.Contains(body, "flagged 1 Feb 2026") || !strings.Contains(body, "5 Jan 2026") {
		t.Error("the coordinator's list lacks case links or dates")
	}

	// One reason: the participants who left screen-positive by declining.
	_, body = a.get(coord, "/progress/cascade/screen_positive?exit=declined")
	if got := studyIDs(body); !slices.Equal(got, []string{"P5"}) {
		t.Errorf("declined lists %v", got)
	}
	// Every box and exit on the page links to a list of the same size.
	_, page := a.get(monitor, "/progress")
	for _, m := range regexp.MustCompile(`href="(/progress/cascade/[^"]+)"`).FindAllStringSubmatch(page, -1) {
		res, body := a.get(monitor, html.UnescapeString(m[1]))
		if res.StatusCode != http.StatusOK {
			t.Errorf("%s: status %d", m[1], res.StatusCode)
			continue
		}
		if n := byTestID(body, "box-listed"); n != fmt.Sprint(len(studyIDs(body))) {
			t.Errorf("%s: says %s, lists %d", m[1], n, len(studyIDs(body)))
		}
	}
}

// TestCascadeRoutesRefuseUnknownValues: unknown boxes and pages are 404,
// malformed choices 400 (a tampered address; finding 12 of issue 14 made
// out-of-range choices refused rather than replaced by defaults), never a
// server error.
func TestCascadeRoutesRefuseUnknownValues(t *testing.T) {
	a := newAppAt(t, time.Date(2026, 3, 11, 12, 0, 0, 0, time.UTC))
	cascadeCohort(t, a)
	c := a.signIn(cohort.Investigator)
	for _, tt := range []struct {
		path string
		want int
	}{
		{"/progress/cascade/nonsense", http.StatusNotFound},
		{"/progress/cascade/enrolled?after=999999&shown=200", http.StatusNotFound},
		{"/progress/cascade/enrolled?protocol=999", http.StatusNotFound},
		{"/progress/cascade/enrolled?exit=bogus", http.StatusBadRequest},
		{"/progress/cascade/enrolled?after=0", http.StatusBadRequest},
		{"/progress/cascade/enrolled?after=x", http.StatusBadRequest},
		{"/progress?from=2026-13-01", http.StatusBadRequest},
		{"/progress?site=999", http.StatusBadRequest},
		{"/progress?site=AA", http.StatusBadRequest},
		{"/progress?protocol=-1", http.StatusBadRequest},
		{"/progress?protocol=999", http.StatusNotFound},
		{"/progress/report?from=2026-02-01&to=2026-01-01", http.StatusBadRequest},
		{"/progress/report?to=0001-01-01", http.StatusBadRequest},
		{"/progress/report.zip?protocol=abc", http.StatusBadRequest},
		{"/progress/report.zip?protocol=999", http.StatusNotFound},
		{"/progress/cascade/enrolled?exit=declined", http.StatusOK},        // a known reason nobody left by here: an empty list
		{"/progress/report?window=999&paper=legal", http.StatusBadRequest}, // out-of-range choices are refused
		{"/progress/report?window=6&paper=letter", http.StatusOK},
	} {
		res, _ := a.get(c, tt.path)
		if res.StatusCode != tt.want {
			t.Errorf("%s: status %d, want %d", tt.path, res.StatusCode, tt.want)
		}
	}
}

// TestDataSufficiencyWorkedExample checks the weekly data sufficiency table
// against a count by hand. Today is Wednesday 2026-03-11; the study follows
// each participant for 3 weeks. A participant-week n covers days
// [7n, 7n+7) after enrolment and counts in the calendar week (from Monday)
// in which it ends.
//
//	S1, enrolled Monday 2026-02-09: weeks 0, 1, 2 end 02-15, 02-22, 03-01
//	  (calendar weeks of 02-09, 02-16, 02-23); week 3 is past follow-up.
//	  Verdicts: negative, positive, insufficient, and negative in week 3.
//	S2, enrolled Wednesday 2026-02-11, withdrew 2026-02-26: weeks 0 and 1
//	  end 02-17 and 02-24 (calendar weeks of 02-16, 02-23); week 2 would
//	  end after the withdrawal. Verdicts: negative, negative, and positive
//	  in week 2.
//	S3, enrolled 2026-03-09: no week complete.
//	A positive week 2 of S1 under an inactive protocol version is ignored.
//
// Due: 02-09: 1; 02-16: 2; 02-23: 2. With enough wear: 02-09: 1 (S1 w0);
// 02-16: 2 (S1 w1, S2 w0); 02-23: 1 (S2 w1; S1 w2 was insufficient).
// A monitor sees the same rows labelled by recruitment week, counted from
// the week of the first enrolment (S1's, 02-09): weeks 0, 1 and 2.
func TestDataSufficiencyWorkedExample(t *testing.T) {
	a := newAppAt(t, time.Date(2026, 3, 11, 12, 0, 0, 0, time.UTC))
	for _, q := range []string{
		`INSERT INTO study (id, name, follow_up_weeks) VALUES (1, 'Sufficiency study', 3)`,
		`INSERT INTO sites (code, name) VALUES ('AA', 'Site A')`,
		`INSERT INTO protocols (name, version, params, active, used) VALUES ('weekly screen', 1, '{}', true, true), ('weekly screen', 2, '{}', false, true)`,
		`INSERT INTO participants (study_id, site_id, time_zone, enrolled_on, withdrawn_on) VALUES
		 ('S1', 1, 'UTC', '2026-02-09', NULL), ('S2', 1, 'UTC', '2026-02-11', '2026-02-26'), ('S3', 1, 'UTC', '2026-03-09', NULL)`,
		`INSERT INTO screen_results (participant_id, protocol_id, week, verdict, reason, result, input_digest)
		 SELECT p.id, v.protocol, v.week, v.verdict, 'test', '{}', 'd' FROM participants p
		 JOIN (VALUES ('S1', 1, 0, 'negative'), ('S1', 1, 1, 'positive'), ('S1', 1, 2, 'insufficient'), ('S1', 1, 3, 'negative'),
		              ('S2', 1, 0, 'negative'), ('S2', 1, 1, 'negative'), ('S2', 1, 2, 'positive'), ('S1', 2, 2, 'positive'))
		      AS v(sid, protocol, week, verdict) ON v.sid = p.study_id`,
	} {
		a.exec(q)
	}
	_, body := a.get(a.signIn(cohort.Investigator), "/progress")
	want := map[string]string{
		"sufficiency-2026-02-09": "9 Feb 2026 1 1 100%",
		"sufficiency-2026-02-16": "16 Feb 2026 2 2 100%",
		"sufficiency-2026-02-23": "23 Feb 2026 2 1 50%",
	}
	if got := testIDs(body, "sufficiency-2"); len(got) != len(want) {
		t.Errorf("weeks shown %v, want %d", got, len(want))
	}
	for id, w := range want {
		if got := byTestID(body, id); got != w {
			t.Errorf("%s: %q, want %q", id, got, w)
		}
	}
	_, body = a.get(a.signIn(cohort.Monitor), "/progress")
	for id, w := range map[string]string{
		"sufficiency-recruitment week 0": "recruitment week 0 1 1 100%",
		"sufficiency-recruitment week 1": "recruitment week 1 2 2 100%",
		"sufficiency-recruitment week 2": "recruitment week 2 2 1 50%",
	} {
		if got := byTestID(body, id); got != w {
			t.Errorf("monitor %s: %q, want %q", id, got, w)
		}
	}
}

// TestDataSufficiencyCountsWeeksEndedInTheStudyZone: a participant-week ends
// at midnight in the study's time zone. At 21:00 on Sunday 1 March in
// Chicago (03:00 on 2 March in UTC) the week S1 began on 23 February has not
// ended; four hours after midnight in Chicago it has. Hand-worked from the
// enrolment dates: S1 enrolled Monday 9 February (weeks end on Sundays), S2
// on Wednesday 11 February (weeks end on Tuesdays, week 1 on 24 February).
func TestDataSufficiencyCountsWeeksEndedInTheStudyZone(t *testing.T) {
	for _, c := range []struct {
		now  time.Time
		want string
	}{
		{time.Date(2026, 3, 2, 3, 0, 0, 0, time.UTC), "23 Feb 2026 1 1 100%"},
		{time.Date(2026, 3, 2, 10, 0, 0, 0, time.UTC), "23 Feb 2026 2 1 50%"},
	} {
		a := newAppAt(t, c.now)
		for _, q := range []string{
			`INSERT INTO study (id, name, follow_up_weeks, time_zone) VALUES (1, 'Zone study', 3, 'America/Chicago')`,
			`INSERT INTO sites (code, name) VALUES ('AA', 'Site A')`,
			`INSERT INTO protocols (name, version, params, active, used) VALUES ('weekly screen', 1, '{}', true, true)`,
			`INSERT INTO participants (study_id, site_id, time_zone, enrolled_on) VALUES
			 ('S1', 1, 'America/Chicago', '2026-02-09'), ('S2', 1, 'America/Chicago', '2026-02-11')`,
			`INSERT INTO screen_results (participant_id, protocol_id, week, verdict, reason, result, input_digest)
			 SELECT p.id, 1, v.week, v.verdict, 'test', '{}', 'd' FROM participants p
			 JOIN (VALUES ('S1', 0, 'negative'), ('S1', 1, 'negative'), ('S2', 0, 'negative'), ('S2', 1, 'negative'))
			      AS v(sid, week, verdict) ON v.sid = p.study_id`,
		} {
			a.exec(q)
		}
		_, body := a.get(a.signIn(cohort.Investigator), "/progress")
		if got := byTestID(body, "sufficiency-2026-02-23"); got != c.want {
			t.Errorf("at %s: week of 2026-02-23 %q, want %q", c.now.Format(time.RFC3339), got, c.want)
		}
	}
}

// TestPagesSayHowFreshTheFiguresAre: rows loaded by bare SQL (outside the
// store's transactions) wait for the background pass; meanwhile the progress
// page and the statistics say how many participants' figures wait, and once
// the pass has run the notice is gone and the figures count them.
func TestPagesSayHowFreshTheFiguresAre(t *testing.T) {
	a := newAppAt(t, time.Date(2026, 3, 11, 12, 0, 0, 0, time.UTC))
	cascadeCohort(t, a)
	c := a.signIn(cohort.Investigator)
	if _, body := a.get(c, "/progress"); strings.Contains(body, `data-testid="figures-freshness"`) {
		t.Fatal("a notice before anything waits")
	}
	// Two more screen-negative weeks for everyone, by bare SQL.
	if _, err := a.store.Pool().Exec(context.Background(), `INSERT INTO screen_results (participant_id, protocol_id, week, verdict, reason, result, input_digest, wear_hours)
		SELECT p.id, pr.id, w, 'negative', 'regular', '{}', 'd', 100 FROM participants p CROSS JOIN protocols pr CROSS JOIN generate_series(20, 21) w`); err != nil {
		t.Fatal(err)
	}
	var n int
	if err := a.store.Pool().QueryRow(context.Background(), `SELECT count(*) FROM participants`).Scan(&n); err != nil {
		t.Fatal(err)
	}
	for _, path := range []string{"/progress", "/confirmations/statistics"} {
		_, body := a.get(c, path)
		if !strings.Contains(body, `data-testid="figures-freshness"`) || !strings.Contains(body, fmt.Sprintf("Figures of %d participants", n)) {
			t.Errorf("%s: no notice of %d participants waiting", path, n)
		}
	}
	a.drainFigures()
	if _, body := a.get(c, "/progress"); strings.Contains(body, `data-testid="figures-freshness"`) {
		t.Error("the notice stays after the background pass")
	}
}
