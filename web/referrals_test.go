package web

import (
	"archive/zip"
	"bytes"
	"context"
	"encoding/csv"
	"encoding/json"
	"fmt"
	"io"
	"net/http"
	"net/url"
	"regexp"
	"slices"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/deid"
	"cohortdesk/cohort/deid/deidtest"
	"cohortdesk/cohort/demo"
	"cohortdesk/cohort/ecg"
	"cohortdesk/cohort/ecg/ecgtest"
	"cohortdesk/cohort/referral"
	"cohortdesk/cohort/screen"
	"cohortdesk/db"
)

// referralClock is the test server's "now": a day after the demo study's.
var referralClock = demo.DefaultToday().Add(26 * time.Hour)

// protocolFor makes the default protocol the active, used version once and
// returns its id.
func protocolFor(t *testing.T, a *app) int {
	t.Helper()
	var id int
	err := a.store.Pool().QueryRow(context.Background(), `SELECT id FROM protocols WHERE active`).Scan(&id)
	if err == nil {
		return id
	}
	params, _ := json.Marshal(screen.DefaultProtocol())
	if err := a.store.Pool().QueryRow(context.Background(), `INSERT INTO protocols (name, version, params, active, used)
		VALUES ('weekly screen', 1, $1, true, true) RETURNING id`, params).Scan(&id); err != nil {
		t.Fatal(err)
	}
	return id
}

// confirmAF gives a participant what a confirmed case has: screening results
// of their stored weeks (computed by the screen itself, the most irregular
// week marked positive), a case holding that week in "recording received",
// a synthetic AF recording and an over-read with the given verdict. The
// case's free text (note, closing note, attempt note, over-read comment) is
// filled with planted text, which must never leave. It returns the case id.
func confirmAF(t *testing.T, a *app, pid int64, rhythm string, planted string) int64 {
	t.Helper()
	ctx := context.Background()
	proto := protocolFor(t, a)
	p, err := a.store.Participant(ctx, pid)
	if err != nil {
		t.Fatal(err)
	}
	best, bestShare := -1, -1.0
	err = a.store.EachWearWeek(ctx, []int64{pid}, func(_ db.Participant, w *cohort.Week) error {
		res, err := screen.Screen(w, screen.DefaultProtocol(), referralClock.UnixMilli(), nil)
		if err != nil {
			return err
		}
		share := 0.0
		for _, wr := range res.Windows {
			share = max(share, wr.Share)
		}
		if share > bestShare {
			best, bestShare = w.Week, share
		}
		raw, _ := json.Marshal(res)
		// The demo loader screened already; replace its results with these.
		_, err = a.store.Pool().Exec(ctx, `INSERT INTO screen_results (participant_id, protocol_id, week, verdict, reason, result, input_digest, wear_hours)
			VALUES ($1, $2, $3, $4, $5, $6, $7, $8)
			ON CONFLICT (participant_id, protocol_id, week) DO UPDATE SET verdict = EXCLUDED.verdict, reason = EXCLUDED.reason,
			  result = EXCLUDED.result, input_digest = EXCLUDED.input_digest, wear_hours = EXCLUDED.wear_hours`,
			pid, proto, w.Week, string(res.Verdict), res.Reason, raw, res.InputDigest, res.WearHours)
		return err
	})
	if err != nil {
		t.Fatal(err)
	}
	a.drainFigures()
	if best < 0 {
		t.Fatalf("participant %d has no stored week", pid)
	}
	a.exec(`UPDATE screen_results SET verdict = 'positive' WHERE participant_id = $1 AND protocol_id = $2 AND week = $3`, pid, proto, best)
	flagged := p.EnrolledOn.AddDays(7*best + 8).In(p.Location())
	var caseID int64
	if err := a.store.Pool().QueryRow(ctx, `INSERT INTO cases (participant_id, protocol_id, first_week, last_week, state, flagged_at,
		    reached_at, recorder_sent_at, recording_back_at, tracking_number, note)
		VALUES ($1, $2, $3, $3, 'recording_received', $4, $5, $6, $7, $8, $9) RETURNING id`,
		pid, proto, best, flagged, flagged.Add(24*time.Hour), flagged.Add(48*time.Hour), flagged.Add(120*time.Hour), "TRK-"+planted, planted).Scan(&caseID); err != nil {
		t.Fatal(err)
	}
	// A case the demo opened for the same week gives the week up to this one.
	a.exec(`DELETE FROM case_weeks WHERE participant_id = $1 AND protocol_id = $2 AND week = $3`, pid, proto, best)
	a.exec(`INSERT INTO case_weeks (participant_id, protocol_id, week, case_id) VALUES ($1, $2, $3, $4)`, pid, proto, best, caseID)
	a.exec(`INSERT INTO contact_attempts (case_id, participant_id, at, channel, outcome, note) VALUES ($1, $2, $3, 'phone', 'reached', $4)`,
		caseID, pid, flagged.Add(24*time.Hour), "spoke to "+planted)
	syn, err := ecg.Synthesize(ecgtest.AFRR(50, 680, uint64(pid)), ecg.SynthOptions{RateHz: 250})
	if err != nil {
		t.Fatal(err)
	}
	var beats []int32
	for _, rt := range syn.RTimes {
		beats = append(beats, int32(rt*250))
	}
	var rec int64
	if err := a.store.Pool().QueryRow(ctx, `INSERT INTO recordings (case_id, participant_id, taken_at, duration_s, auto_interpretation,
		    waveform_format, file_name, sampling_hz, samples, beats)
		VALUES ($1, $2, $3, $4, 'suggests_af', 'csv', $5, 250, $6, $7) RETURNING id`, caseID, pid, flagged.Add(100*time.Hour), syn.Waveform.Seconds(),
		planted+".csv", db.EncodeSamples(syn.Waveform.Samples), beats).Scan(&rec); err != nil {
		t.Fatal(err)
	}
	a.exec(`INSERT INTO over_reads (recording_id, case_id, participant_id, role, rhythm, reader, read_on, comment)
		VALUES ($1, $2, $3, 'first', $4, 'Reader of record', $5, $6)`, rec, caseID, pid, rhythm, cohort.DateOf(flagged.Add(130*time.Hour)).String(), "read for "+planted)
	return caseID
}

// demoCanaries loads the small demo, confirms AF for each canary participant
// and returns the canary values (study IDs included: exports must replace
// them) and the canaries' participant and case ids by study ID.
func demoCanaries(t *testing.T, a *app) (demoStudy *demo.Study, canaries []string, pids, cases map[string]int64) {
	t.Helper()
	res := loadDemo(t, a, 24)
	a.srv.now = func() time.Time { return referralClock }
	pids, cases = map[string]int64{}, map[string]int64{}
	for _, sid := range canaryStudyIDs(res) {
		p, err := a.store.ParticipantByStudyID(context.Background(), sid)
		if err != nil {
			t.Fatal(err)
		}
		pids[sid] = p.ID
	}
	if len(pids) < 3 {
		t.Fatalf("%d canary participants in the small demo, want 3", len(pids))
	}
	for _, c := range res.Study.CanaryValues() {
		canaries = append(canaries, c.Value)
	}
	for sid, pid := range pids {
		// Free text planted with the participant's own name and phone.
		var planted []string
		for _, c := range res.Study.CanaryValues() {
			if c.StudyID == sid && (c.Field == "full_name" || c.Field == "phone") {
				planted = append(planted, c.Value)
			}
		}
		cases[sid] = confirmAF(t, a, pid, "af", strings.Join(planted, " "))
	}
	return res.Study, canaries, pids, cases
}

func body(t *testing.T, res *http.Response) []byte {
	t.Helper()
	defer res.Body.Close()
	b, err := io.ReadAll(res.Body)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

func (a *app) post(c *http.Client, path string, v url.Values) (*http.Response, []byte) {
	a.t.Helper()
	res, err := c.PostForm(a.ts.URL+path, v)
	if err != nil {
		a.t.Fatal(err)
	}
	return res, body(a.t, res)
}

func unzip(t *testing.T, b []byte) map[string][]byte {
	t.Helper()
	zr, err := zip.NewReader(bytes.NewReader(b), int64(len(b)))
	if err != nil {
		t.Fatalf("not a zip: %v", err)
	}
	out := map[string][]byte{}
	for _, f := range zr.File {
		rc, err := f.Open()
		if err != nil {
			t.Fatal(err)
		}
		data, _ := io.ReadAll(rc)
		rc.Close()
		out[f.Name] = data
	}
	return out
}

var referralLocRE = regexp.MustCompile(`^/referrals/(\d+)\?done=issued$`)

// issueVia issues a summary through the form and returns its id.
func issueVia(t *testing.T, a *app, c *http.Client, pid, caseID int64, format, paper string) string {
	t.Helper()
	res, _ := a.post(c, fmt.Sprintf("/participants/%d/referral", pid), url.Values{"case": {fmt.Sprint(caseID)}, "format": {format}, "paper": {paper}})
	m := referralLocRE.FindStringSubmatch(res.Header.Get("Location"))
	if res.StatusCode != http.StatusSeeOther || m == nil {
		t.Fatalf("issue: status %d location %q", res.StatusCode, res.Header.Get("Location"))
	}
	return m[1]
}

// Safe Harbor, 45 CFR 164.514(b)(2) (verified): with the demo loaded, the
// summary in both formats, the batch of PDFs and the dataset export contain
// none of the planted canary identifiers (names, telephone, e-mail, street,
// city, birth dates, ZIP, device serial, study ID), even though the cases'
// free text was filled with them; the PDF text is read back with pdftotext.
func TestReferralsAndExportsLeakNoCanary(t *testing.T) {
	a := newApp(t)
	study, canaries, pids, cases := demoCanaries(t, a)
	coord := a.signIn(cohort.Coordinator)
	checked := 0
	check := func(what, text string) {
		t.Helper()
		checked++
		if leaks := deidtest.Leaks(text, canaries); len(leaks) > 0 {
			t.Errorf("%s leaks %v", what, leaks)
		}
	}
	for sid, pid := range pids {
		res, page := a.get(coord, fmt.Sprintf("/participants/%d/referral?case=%d", pid, cases[sid]))
		if res.StatusCode != http.StatusOK || !strings.Contains(page, `data-testid="preview-mark"`) {
			t.Fatalf("preview of %s: status %d", sid, res.StatusCode)
		}
		check("preview of "+sid, page)
		id := issueVia(t, a, coord, pid, cases[sid], "pdf", paperLetter)
		res, _ = a.get(coord, "/referrals/"+id)
		res2, shown := a.get(coord, "/referrals/"+id)
		if res.StatusCode != http.StatusOK || res2.StatusCode != http.StatusOK {
			t.Fatalf("issued summary %s: status %d", id, res.StatusCode)
		}
		check("issued summary of "+sid, shown)
		pres, err := coord.Get(a.ts.URL + "/referrals/" + id + "/pdf")
		if err != nil {
			t.Fatal(err)
		}
		pdf := body(t, pres)
		text := pdfText(t, pdf)
		check("PDF of "+sid, text)
		code := deid.Code([]byte(testSecret), sid)
		if !strings.Contains(text, code) || !containsWrapped(text, deid.ReviewCaution) || !containsWrapped(text, "Screening is not diagnosis") {
			t.Errorf("PDF of %s lacks its code %s or the cautions", sid, code)
		}
	}
	// The canary over 90 (demo canary 1) is folded in the summary.
	old := study.CanaryValues()[13].StudyID // second canary's first value
	if _, page := a.get(coord, fmt.Sprintf("/participants/%d/referral", pids[old])); !strings.Contains(page, deid.Over89Label) {
		t.Errorf("the summary of canary %s (over 90) does not say %q", old, deid.Over89Label)
	}

	res, batch := a.post(coord, "/exports/referrals", url.Values{"paper": {"a4"}})
	if res.StatusCode != http.StatusOK || res.Header.Get("Content-Type") != "application/zip" {
		t.Fatalf("batch: status %d %s", res.StatusCode, res.Header.Get("Content-Type"))
	}
	files := unzip(t, batch)
	if len(files) != len(pids)+2 {
		t.Errorf("batch holds %d files for %d ready cases, the cautions and a manifest", len(files), len(pids))
	}
	for name, b := range files {
		if strings.HasSuffix(name, ".pdf") {
			check("batch "+name, pdfText(t, b))
		} else {
			check("batch "+name, string(b))
		}
	}

	inv := a.signIn(cohort.Investigator)
	res, ds := a.post(inv, "/exports/dataset", nil)
	if res.StatusCode != http.StatusOK {
		t.Fatalf("dataset export: status %d", res.StatusCode)
	}
	files = unzip(t, ds)
	for _, want := range []string{"participants.csv", "participant_weeks.csv", "screen_results.csv", "screen_windows.csv", "cases.csv", "over_reads.csv", "dictionary.csv", "README.txt", "manifest.json"} {
		b, ok := files[want]
		if !ok {
			t.Errorf("dataset export lacks %s", want)
			continue
		}
		check("dataset "+want, string(b))
	}
	if checked < 20 {
		t.Fatalf("only %d documents checked", checked)
	}
	// The same crawl as a coordinator's case page finds the canaries: the
	// check can fail.
	_, casePage := a.get(coord, fmt.Sprintf("/cases/%d", cases[old]))
	if len(deidtest.Leaks(casePage, canaries)) == 0 {
		t.Fatal("the case page shows no canary either: the test cannot tell a leak")
	}
}

// readCSV parses one file of the dataset export into rows keyed by column.
func readCSV(t *testing.T, b []byte) []map[string]string {
	t.Helper()
	recs, err := csv.NewReader(bytes.NewReader(b)).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	var out []map[string]string
	for _, r := range recs[1:] {
		m := map[string]string{}
		for i, h := range recs[0] {
			m[h] = r[i]
		}
		out = append(out, m)
	}
	return out
}

// The dataset export: a manifest with each file's rows and SHA-256, headers
// on the allow-lists, ages 89, 90 and 91 at enrolment around the Safe Harbor
// boundary (45 CFR 164.514(b)(2)(i)(C), verified), the restricted ZIP
// prefixes of HHS's 2012 guidance (verified, secondary) as 000, dates as
// study days, the export recorded and audited; and the codes follow the
// deployment secret: the same secret gives the same codes, another secret
// other codes.
func TestDatasetExport(t *testing.T) {
	a := newApp(t)
	a.srv.now = func() time.Time { return referralClock }
	a.exec(`INSERT INTO sites (code, name, time_zone) VALUES ('NW', 'Northwood clinic', 'UTC')`)
	a.exec(`INSERT INTO participants (study_id, site_id, time_zone, enrolled_on, age_at_enrolment, sex, hypertension, withdrawn_on)
		VALUES ('NW-0089', 1, 'UTC', '2026-01-05', 89, 'F', true, '2026-03-02'), ('NW-0090', 1, 'UTC', '2026-01-05', 90, 'M', NULL, NULL),
		       ('NW-0091', 1, 'UTC', '2026-01-05', 91, 'F', false, NULL), ('NW-0050', 1, 'UTC', '2026-01-05', 50, 'U', NULL, NULL)`)
	a.exec(`INSERT INTO participant_identity (participant_id, zip, given_name, birth_date)
		SELECT id, CASE study_id WHEN 'NW-0089' THEN '55601' WHEN 'NW-0090' THEN '69201-1234' WHEN 'NW-0091' THEN '20301' ELSE '02139' END,
		       'Plantedname', date '1936-01-01' FROM participants`)
	inv := a.signIn(cohort.Investigator)
	export := func() map[string][]byte {
		res, b := a.post(inv, "/exports/dataset", nil)
		if res.StatusCode != http.StatusOK {
			t.Fatalf("export: status %d", res.StatusCode)
		}
		return unzip(t, b)
	}
	files := export()
	rows := readCSV(t, files["participants.csv"])
	byCode := map[string]map[string]string{}
	for _, r := range rows {
		byCode[r["referral_code"]] = r
	}
	for _, tt := range []struct{ sid, age, zip3, withdrawn string }{
		{"NW-0089", "89", "000", "56"},           // 556 restricted; withdrawn 2026-03-02 is day 56
		{"NW-0090", deid.Over89Label, "000", ""}, // 692 restricted
		{"NW-0091", deid.Over89Label, "000", ""}, // 203 restricted
		{"NW-0050", "50", "021", ""},
	} {
		r, ok := byCode[deid.Code([]byte(testSecret), tt.sid)]
		if !ok {
			t.Fatalf("no row with the code of %s", tt.sid)
		}
		if r["age_at_enrolment"] != tt.age || r["zip3"] != tt.zip3 || r["withdrawn_study_day"] != tt.withdrawn {
			t.Errorf("%s exported as %v, want age %q, zip3 %q, withdrawn day %q", tt.sid, r, tt.age, tt.zip3, tt.withdrawn)
		}
	}
	all := ""
	for _, b := range files {
		all += string(b)
	}
	if leaks := deidtest.Leaks(all, []string{"NW-0089", "NW-0090", "NW-0091", "NW-0050", "Plantedname", "1936-01-01", "2026-01-05", "2026-03-02", "55601", "Northwood"}); len(leaks) > 0 {
		t.Errorf("the export contains %v", leaks)
	}
	var man datasetManifest
	if err := json.Unmarshal(files["manifest.json"], &man); err != nil {
		t.Fatal(err)
	}
	for _, f := range man.Files {
		b, ok := files[f.Name]
		if !ok || sha256Hex(b) != f.SHA256 || int64(len(b)) != f.Bytes {
			t.Errorf("manifest entry %+v does not match the file", f)
		}
		if f.Rows != nil && strings.HasSuffix(f.Name, ".csv") && f.Name != "dictionary.csv" {
			if got := len(readCSV(t, b)); got != *f.Rows {
				t.Errorf("%s: manifest says %d rows, file has %d", f.Name, *f.Rows, got)
			}
		}
	}
	for _, tb := range deid.DatasetTables() {
		recs, _ := csv.NewReader(bytes.NewReader(files[tb.File])).Read()
		if !slices.Equal(recs, tb.Header()) || deid.CheckFields(tb.Export, recs) != nil {
			t.Errorf("%s header %v", tb.File, recs)
		}
	}
	var n, audited int
	a.store.Pool().QueryRow(context.Background(), `SELECT count(*) FROM exports WHERE kind = 'dataset'`).Scan(&n)
	a.store.Pool().QueryRow(context.Background(), `SELECT count(*) FROM audit_events WHERE action = 'export.dataset'`).Scan(&audited)
	if n != 1 || audited != 1 {
		t.Errorf("%d exports recorded, %d audited; want 1 and 1", n, audited)
	}

	codes := func(files map[string][]byte) []string {
		var out []string
		for _, r := range readCSV(t, files["participants.csv"]) {
			out = append(out, r["referral_code"])
		}
		slices.Sort(out)
		return out
	}
	first := codes(files)
	if again := codes(export()); !slices.Equal(first, again) {
		t.Errorf("same secret, other codes: %v then %v", first, again)
	}
	a.srv.secret = []byte("another deployment secret, also long enough")
	other := codes(export())
	for _, c := range other {
		if slices.Contains(first, c) {
			t.Errorf("code %s is the same under another secret", c)
		}
	}
	a.srv.secret = nil
	if res, _ := a.post(inv, "/exports/dataset", nil); res.StatusCode != http.StatusServiceUnavailable {
		t.Errorf("export without a secret: status %d, want 503", res.StatusCode)
	}
}

// Ages 89, 90 and 91 on the day of the summary (45 CFR 164.514(b)(2)(i)(C);
// verified): the age band is 85-89, then "90 or older".
func TestSummaryAgeBoundary(t *testing.T) {
	a := newApp(t)
	a.srv.now = func() time.Time { return referralClock }
	today := cohort.DateOf(referralClock)
	a.exec(`INSERT INTO sites (code, name, time_zone) VALUES ('NW', 'Northwood clinic', 'UTC')`)
	coord := a.signIn(cohort.Coordinator)
	for i, tt := range []struct {
		birth cohort.Date
		want  string
	}{
		{cohort.Date{Year: today.Year - 90, Month: today.Month, Day: today.Day}.AddDays(1), "85-89"}, // 89, 90 tomorrow
		{cohort.Date{Year: today.Year - 90, Month: today.Month, Day: today.Day}, deid.Over89Label},
		{cohort.Date{Year: today.Year - 91, Month: today.Month, Day: today.Day}.AddDays(-3), deid.Over89Label},
	} {
		var pid int64
		if err := a.store.Pool().QueryRow(context.Background(), `INSERT INTO participants (study_id, site_id, time_zone, enrolled_on)
			VALUES ($1, 1, 'UTC', '2026-01-05') RETURNING id`, fmt.Sprintf("NW-%04d", i)).Scan(&pid); err != nil {
			t.Fatal(err)
		}
		a.exec(`INSERT INTO participant_identity (participant_id, birth_date) VALUES ($1, $2)`, pid, tt.birth.String())
		res, page := a.get(coord, fmt.Sprintf("/participants/%d/referral", pid))
		if res.StatusCode != http.StatusOK {
			t.Fatalf("preview: status %d", res.StatusCode)
		}
		if !strings.Contains(page, "<dt>Age band</dt><dd>"+tt.want+"</dd>") {
			t.Errorf("born %s: the summary does not show age band %q", tt.birth, tt.want)
		}
		if strings.Contains(page, fmt.Sprint(tt.birth.Year)) {
			t.Errorf("born %s: the birth year appears", tt.birth)
		}
	}
}

// Sign-off: only investigators see and use it; it needs the review box;
// it moves the case to referred, is audited, and cannot happen twice. The
// recorded content draws the same PDF again (reproducibility), and a
// tampered record is refused.
func TestReferralSignOffAndReproduction(t *testing.T) {
	a := newApp(t)
	_, _, pids, cases := demoCanaries(t, a)
	var sid string
	for k := range pids {
		sid = k
		break
	}
	coord, inv := a.signIn(cohort.Coordinator), a.signIn(cohort.Investigator)
	id := issueVia(t, a, coord, pids[sid], cases[sid], "html", paperA4)
	if _, page := a.get(coord, "/referrals/"+id); strings.Contains(page, `data-testid="form-signoff"`) {
		t.Error("a coordinator is offered the sign-off")
	}
	_, page := a.get(inv, "/referrals/"+id)
	if !strings.Contains(page, `data-testid="form-signoff"`) || !strings.Contains(page, "content as issued") {
		t.Fatal("an investigator is not offered the sign-off, or the digest check fails")
	}
	if res, _ := a.post(coord, "/referrals/"+id+"/signoff", url.Values{"reviewed": {"yes"}}); res.StatusCode != http.StatusForbidden {
		t.Errorf("coordinator sign-off: status %d, want 403", res.StatusCode)
	}
	if res, b := a.post(inv, "/referrals/"+id+"/signoff", nil); res.StatusCode != http.StatusUnprocessableEntity || !strings.Contains(string(b), `data-testid="error-reviewed"`) {
		t.Errorf("sign-off without the review box: status %d", res.StatusCode)
	}
	if res, _ := a.post(inv, "/referrals/"+id+"/signoff", url.Values{"reviewed": {"yes"}}); res.StatusCode != http.StatusSeeOther {
		t.Fatalf("sign-off: status %d", res.StatusCode)
	}
	c, err := a.store.Case(context.Background(), cases[sid])
	if err != nil || c.State != "referred" {
		t.Fatalf("case after sign-off: %s %v", c.State, err)
	}
	var audited int
	a.store.Pool().QueryRow(context.Background(), `SELECT count(*) FROM audit_events WHERE action = 'referral.signoff' AND object_id = $1`, id).Scan(&audited)
	if audited != 1 {
		t.Errorf("%d sign-off audit events", audited)
	}
	if res, _ := a.post(inv, "/referrals/"+id+"/signoff", url.Values{"reviewed": {"yes"}}); res.StatusCode != http.StatusConflict {
		t.Errorf("second sign-off: status %d, want 409", res.StatusCode)
	}
	if _, page := a.get(coord, "/exports"); strings.Contains(page, fmt.Sprintf("referral?case=%d", cases[sid])) {
		t.Error("a referred case is still listed as ready")
	}

	// Reproduction: the PDF drawn from the recorded signed content is the
	// PDF whose digest was recorded at the sign-off; the draft's content
	// still draws the PDF whose digest was recorded at issue.
	var pdfDigest, draftDigest string
	var draft []byte
	a.store.Pool().QueryRow(context.Background(), `SELECT signed_pdf_sha256, pdf_sha256, content FROM referrals WHERE id = $1`, id).Scan(&pdfDigest, &draftDigest, &draft)
	res, err := coord.Get(a.ts.URL + "/referrals/" + id + "/pdf")
	if err != nil {
		t.Fatal(err)
	}
	if got := sha256Hex(body(t, res)); got != pdfDigest || res.Header.Get("X-Content-SHA256") != pdfDigest {
		t.Errorf("re-drawn PDF digest %s, recorded %s", got, pdfDigest)
	}
	sum, err := referral.Decode(draft)
	if err != nil {
		t.Fatal(err)
	}
	if pdf, err := referralPDF(sum, paperA4); err != nil || sha256Hex(pdf) != draftDigest {
		t.Errorf("the draft's PDF digest %s, recorded at issue %s (%v)", sha256Hex(pdf), draftDigest, err)
	}
	a.exec(`UPDATE referrals SET signed_content = jsonb_set(signed_content, '{age_band}', '"50-54"') WHERE id = $1`, id)
	if _, page := a.get(coord, "/referrals/"+id); !strings.Contains(page, "content does not match its digest") {
		t.Error("tampered content is not flagged")
	}
	if res, _ := a.get(coord, "/referrals/"+id+"/pdf"); res.StatusCode != http.StatusConflict {
		t.Errorf("PDF of tampered content: status %d, want 409", res.StatusCode)
	}
}

// Role checks of the new routes beyond the route walk, and unknown ids.
func TestReferralRoutesByRole(t *testing.T) {
	a := newApp(t)
	_, _, pids, cases := demoCanaries(t, a)
	var sid string
	for k := range pids {
		sid = k
		break
	}
	coord := a.signIn(cohort.Coordinator)
	id := issueVia(t, a, coord, pids[sid], cases[sid], "pdf", paperA4)
	for _, tt := range []struct {
		role cohort.Role
		path string
		want int
	}{
		{cohort.Monitor, "/exports", http.StatusForbidden},
		{cohort.Monitor, "/referrals/" + id, http.StatusForbidden},
		{cohort.Admin, "/referrals/" + id, http.StatusForbidden},
		{cohort.Admin, "/exports", http.StatusOK},
		{cohort.Investigator, "/referrals/" + id + "/pdf", http.StatusOK},
		{cohort.Coordinator, "/referrals/999999", http.StatusNotFound},
		{cohort.Coordinator, "/referrals/999999/pdf", http.StatusNotFound},
		{cohort.Coordinator, "/referrals/abc", http.StatusNotFound},
		{cohort.Coordinator, "/participants/999999/referral", http.StatusNotFound},
		{cohort.Coordinator, fmt.Sprintf("/participants/%d/referral?case=999999", pids[sid]), http.StatusNotFound},
		{cohort.Coordinator, fmt.Sprintf("/participants/%d/referral?case=abc", pids[sid]), http.StatusBadRequest}, // a malformed query value (issue 14, finding 12)
		{cohort.Coordinator, "/referrals/new?study_id=NOBODY", http.StatusUnprocessableEntity},
		{cohort.Coordinator, "/referrals/new?study_id=" + url.QueryEscape(sid), http.StatusSeeOther},
	} {
		res, _ := a.get(a.signIn(tt.role), tt.path)
		if res.StatusCode != tt.want {
			t.Errorf("%s GET %s: status %d, want %d", tt.role, tt.path, res.StatusCode, tt.want)
		}
	}
	// Another participant's case through this participant's address.
	var other string
	for k := range pids {
		if k != sid {
			other = k
		}
	}
	if res, _ := a.get(coord, fmt.Sprintf("/participants/%d/referral?case=%d", pids[sid], cases[other])); res.StatusCode != http.StatusNotFound {
		t.Errorf("a case of another participant: status %d, want 404", res.StatusCode)
	}
	_, page := a.get(a.signIn(cohort.Admin), "/exports")
	if !strings.Contains(page, `data-testid="dataset-panel"`) || strings.Contains(page, `data-testid="ready-panel"`) || strings.Contains(page, "/referrals/"+id+"\"") {
		t.Error("an administrator's exports page: want the dataset panel only and no links to summaries")
	}
	_, page = a.get(coord, "/exports")
	if strings.Contains(page, `data-testid="dataset-panel"`) || !strings.Contains(page, `data-testid="ready-panel"`) || !strings.Contains(page, deid.ReviewCaution) {
		t.Error("a coordinator's exports page: want summaries, no dataset export, and the review caution")
	}
	if _, page := a.get(coord, fmt.Sprintf("/cases/%d", cases[sid])); !strings.Contains(page, `data-testid="case-referral"`) {
		t.Error("the case page has no link to the referral summary")
	}
	if res, _ := a.post(a.signIn(cohort.Coordinator), "/exports/dataset", nil); res.StatusCode != http.StatusForbidden {
		t.Errorf("coordinator dataset export: status %d, want 403", res.StatusCode)
	}
}
