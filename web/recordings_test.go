package web

import (
	"context"
	"encoding/csv"
	"fmt"
	"net/http"
	"net/url"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/credential"
	"cohortdesk/cohort/ecg"
	"cohortdesk/cohort/ecg/ecgtest"
	"cohortdesk/cohort/followup"
	"cohortdesk/cohort/overread"
	"cohortdesk/cohort/stats"
	"cohortdesk/db"
)

// shippedCases opens n cases (seedFollowUp) and moves each to "recorder sent"
// through the case actions.
func shippedCases(t *testing.T, a *app, n int) []int64 {
	t.Helper()
	ctx := context.Background()
	ids := seedFollowUp(t, a.store, n)
	coord := a.users[cohort.Coordinator].Actor("127.0.0.1", "test")
	for _, id := range ids {
		c, err := a.store.LogAttempt(ctx, coord, id, db.AttemptInput{Version: caseVersion(t, a, id), Channel: "phone", Outcome: "reached"})
		if err != nil {
			t.Fatal(err)
		}
		if _, err := a.store.RecordShipment(ctx, coord, id, c.Version, cohort.DateOf(time.Now().UTC()), ""); err != nil {
			t.Fatal(err)
		}
	}
	return ids
}

// upload posts the recording intake form with a waveform file.
func (a *app) upload(c *http.Client, path string, fields map[string]string, name string, data []byte) (*http.Response, string) {
	a.t.Helper()
	var kv [][2]string
	for k, v := range fields {
		kv = append(kv, [2]string{k, v})
	}
	return a.postFile(c, path, kv, "waveform", name, data)
}

func synthWave(t *testing.T, seconds float64, rate float64) ecg.Waveform {
	t.Helper()
	syn, err := ecg.Synthesize(ecgtest.SinusRR(int(seconds/0.8), 800, 11), ecg.SynthOptions{RateHz: rate})
	if err != nil {
		t.Fatal(err)
	}
	return syn.Waveform
}

func edfFile(t *testing.T, w ecg.Waveform) []byte {
	t.Helper()
	b, err := ecgtest.EncodeEDF(w, ecgtest.EDFWriteOptions{Plus: true, Patient: "MCH-0042 F 04-APR-1950 Brackenfold_Ysolde"})
	if err != nil {
		t.Fatal(err)
	}
	return b
}

func recordingIDFrom(t *testing.T, res *http.Response) int64 {
	t.Helper()
	var id int64
	loc := res.Header.Get("Location")
	if _, err := fmt.Sscanf(loc, "/recordings/%d", &id); err != nil || res.StatusCode != http.StatusSeeOther {
		t.Fatalf("status %d location %q", res.StatusCode, loc)
	}
	return id
}

// TestRecordingUploads stores an EDF+ and a CSV recording through the case
// page's form and shows them: the strip, the hint, the recorder's reading;
// the EDF's patient identification appears nowhere.
func TestRecordingUploads(t *testing.T) {
	a := newApp(t)
	ids := shippedCases(t, a, 2)
	coord := a.signIn(cohort.Coordinator)
	// Taken "now": the cases were flagged moments ago, and a time earlier by an
	// hour or two can fall on the day before the flag (refused) near midnight.
	taken := time.Now().UTC().Format("2006-01-02T15:04")
	for i, tc := range []struct {
		name, format string
		data         []byte
	}{
		{"strip.edf", "EDF+", edfFile(t, synthWave(t, 40, 250))},
		{"strip.csv", "CSV", ecgtest.EncodeCSV(synthWave(t, 40, 500))},
	} {
		res, _ := a.upload(coord, fmt.Sprintf("/cases/%d/recordings", ids[i]), map[string]string{"taken_at": taken, "auto": string(overread.AutoSuggestsRegular)}, tc.name, tc.data)
		id := recordingIDFrom(t, res)
		res, body := a.get(coord, fmt.Sprintf("/recordings/%d", id))
		if res.StatusCode != http.StatusOK {
			t.Fatalf("%s page: %d", tc.name, res.StatusCode)
		}
		for _, want := range []string{fmt.Sprintf(`data-testid="strip-rec%d"`, id), "Hint for the over-reader, not a verdict", overread.AutoSuggestsRegular.Label(),
			tc.format + ", ", `data-testid="cautions"`, "Over-reads are entered by investigators"} {
			if !strings.Contains(body, want) {
				t.Errorf("%s page lacks %q", tc.name, want)
			}
		}
		if strings.Contains(body, "Brackenfold") || strings.Contains(body, "MCH-0042") {
			t.Errorf("%s page shows the EDF patient identification", tc.name)
		}
		if strings.Contains(body, `data-testid="form-over-read"`) {
			t.Errorf("a coordinator is offered the over-read form")
		}
		_, cp := a.get(coord, fmt.Sprintf("/cases/%d", ids[i]))
		if !strings.Contains(cp, fmt.Sprintf(`href="/recordings/%d"`, id)) {
			t.Errorf("case page does not link recording %d", id)
		}
		if c, _ := a.store.Case(context.Background(), ids[i]); c.State != followup.RecordingReceived {
			t.Errorf("case %d in %s", ids[i], c.State)
		}
	}
}

// TestMalformedEDFRefused: a broken header is refused with the field and
// byte offset, the case page is shown again, and nothing is stored.
func TestMalformedEDFRefused(t *testing.T) {
	a := newApp(t)
	ids := shippedCases(t, a, 1)
	coord := a.signIn(cohort.Coordinator)
	bad := edfFile(t, synthWave(t, 40, 250))
	copy(bad[244:252], "one sec ") // duration of a data record, header bytes 244-251 (EDF specification)
	res, body := a.upload(coord, fmt.Sprintf("/cases/%d/recordings", ids[0]), map[string]string{"taken_at": time.Now().UTC().Format("2006-01-02T15:04")}, "bad.edf", bad)
	if res.StatusCode != http.StatusUnprocessableEntity {
		t.Fatalf("status %d", res.StatusCode)
	}
	for _, want := range []string{"duration of a data record", "byte 244", `data-testid="error-waveform"`, "Nothing was stored"} {
		if !strings.Contains(body, want) {
			t.Errorf("refusal lacks %q", want)
		}
	}
	var n int
	a.store.Pool().QueryRow(context.Background(), `SELECT count(*) FROM recordings`).Scan(&n)
	if n != 0 {
		t.Errorf("%d recordings stored", n)
	}
	// Not a multipart upload at all.
	if res := a.postForm(coord, fmt.Sprintf("/cases/%d/recordings", ids[0]), url.Values{"duration_s": {"40"}}); res.StatusCode != http.StatusUnprocessableEntity {
		t.Errorf("plain form: status %d", res.StatusCode)
	}
}

// TestFormValuesRefusedBesideFields: values the lists do not offer, on the
// recording form and the over-read form, are refused by intake's and
// overread's rules with status 422 and the message beside the field; nothing
// is stored.
func TestFormValuesRefusedBesideFields(t *testing.T) {
	a := newApp(t)
	ids := shippedCases(t, a, 1)
	coord := a.signIn(cohort.Coordinator)
	now := time.Now().UTC().Format("2006-01-02T15:04")
	res, body := a.upload(coord, fmt.Sprintf("/cases/%d/recordings", ids[0]), map[string]string{"taken_at": now, "duration_s": "40", "auto": "maybe"}, "", nil)
	if res.StatusCode != http.StatusUnprocessableEntity || !strings.Contains(body, `data-testid="error-auto"`) || !strings.Contains(body, "choose one of the listed readings of the recorder") {
		t.Errorf("unknown reading of the recorder: status %d", res.StatusCode)
	}
	res, body = a.upload(coord, fmt.Sprintf("/cases/%d/recordings", ids[0]), map[string]string{"taken_at": now, "duration_s": "40.5x"}, "", nil)
	if res.StatusCode != http.StatusUnprocessableEntity || !strings.Contains(body, `data-testid="error-duration_s"`) {
		t.Errorf("malformed duration: status %d", res.StatusCode)
	}
	var n int
	if a.store.Pool().QueryRow(context.Background(), `SELECT count(*) FROM recordings`).Scan(&n); n != 0 {
		t.Fatalf("%d recordings stored", n)
	}
	rec, err := a.store.AddRecording(context.Background(), a.users[cohort.Coordinator].Actor("", ""), ids[0], ecg.RecordingInput{TakenAt: time.Now(), DurationS: 45})
	if err != nil {
		t.Fatal(err)
	}
	inv := a.signIn(cohort.Investigator)
	post := fmt.Sprintf("/recordings/%d/over-reads", rec.ID)
	for _, tc := range []struct {
		form  url.Values
		field string
	}{
		{url.Values{"role": {"first"}, "rhythm": {"af"}, "confidence": {"sure"}}, "confidence"},
		{url.Values{"role": {"first"}, "rhythm": {"sinus_rhythm"}, "confidence": {"certain"}}, "rhythm"},
		{url.Values{"role": {"third"}, "rhythm": {"af"}, "confidence": {"certain"}}, "role"},
		{url.Values{"role": {"first"}, "rhythm": {"af"}, "confidence": {"certain"}, "read_on": {"10 June"}}, "read_on"},
	} {
		res, body := a.postFormBody(inv, post, tc.form)
		if res.StatusCode != http.StatusUnprocessableEntity || !strings.Contains(body, `data-testid="error-`+tc.field+`"`) {
			t.Errorf("%v: status %d, want 422 with the message beside %s", tc.form, res.StatusCode, tc.field)
		}
	}
	if a.store.Pool().QueryRow(context.Background(), `SELECT count(*) FROM over_reads`).Scan(&n); n != 0 {
		t.Errorf("%d readings stored", n)
	}
}

// TestShortRecordingShownAsSuch: under 30 s is stored and marked on the
// recording page, the case page and the confirmations list.
func TestShortRecordingShownAsSuch(t *testing.T) {
	a := newApp(t)
	ids := shippedCases(t, a, 1)
	coord := a.signIn(cohort.Coordinator)
	res, _ := a.upload(coord, fmt.Sprintf("/cases/%d/recordings", ids[0]), map[string]string{"taken_at": time.Now().UTC().Format("2006-01-02T15:04")}, "short.csv", ecgtest.EncodeCSV(synthWave(t, 20, 250)))
	id := recordingIDFrom(t, res)
	_, body := a.get(coord, fmt.Sprintf("/recordings/%d", id))
	if !strings.Contains(body, `data-testid="too-short"`) {
		t.Error("recording page does not mark the short recording")
	}
	for _, path := range []string{fmt.Sprintf("/cases/%d", ids[0]), "/confirmations"} {
		if _, body := a.get(coord, path); !strings.Contains(body, "too short for a diagnostic read") {
			t.Errorf("%s does not mark the short recording", path)
		}
	}
}

// TestOverReadFlow: only investigators get the form (beside the cautions)
// and may post it; a second investigator reads blind; their disagreement is
// highlighted and listed; an adjudication settles it.
func TestOverReadFlow(t *testing.T) {
	a := newApp(t)
	ids := shippedCases(t, a, 1)
	ctx := context.Background()
	rec, err := a.store.AddRecording(ctx, a.users[cohort.Coordinator].Actor("", ""), ids[0], ecg.RecordingInput{TakenAt: time.Now(), DurationS: 45, Auto: overread.AutoSuggestsAF})
	if err != nil {
		t.Fatal(err)
	}
	page := fmt.Sprintf("/recordings/%d", rec.ID)
	post := page + "/over-reads"
	inv := a.signIn(cohort.Investigator)
	_, body := a.get(inv, page)
	form := between(body, `data-testid="form-over-read"`, "</form>")
	if form == "" || !strings.Contains(body, `data-testid="cautions"`) {
		t.Fatal("the investigator gets no over-read form with the cautions")
	}
	for _, want := range []string{`value="af"`, `value="flutter"`, `value="sinus"`, `value="other"`, `value="uninterpretable"`, `name="confidence"`, `name="comment"`, `name="read_on"`, "Test Investigator"} {
		if !strings.Contains(form, want) {
			t.Errorf("form lacks %q", want)
		}
	}
	for _, r := range []cohort.Role{cohort.Coordinator, cohort.Admin, cohort.Monitor} {
		if res := a.postForm(a.signIn(r), post, url.Values{"role": {"first"}, "rhythm": {"af"}, "confidence": {"certain"}}); res.StatusCode != http.StatusForbidden {
			t.Errorf("%s posting an over-read: status %d", r, res.StatusCode)
		}
	}
	res, body := a.postFormBody(inv, post, url.Values{"role": {"first"}, "confidence": {"certain"}})
	if res.StatusCode != http.StatusUnprocessableEntity || !strings.Contains(body, `data-testid="error-rhythm"`) {
		t.Errorf("missing rhythm: status %d", res.StatusCode)
	}
	if res := a.postForm(inv, post, url.Values{"role": {"first"}, "rhythm": {"af"}, "confidence": {"certain"}, "comment": {"irregularly irregular"}}); res.StatusCode != http.StatusSeeOther {
		t.Fatalf("first reading: status %d", res.StatusCode)
	}
	if c, _ := a.store.Case(ctx, ids[0]); c.State != followup.OverRead {
		t.Errorf("case in %s after an AF reading", c.State)
	}
	_, body = a.get(inv, page)
	if strings.Contains(body, `data-testid="form-over-read"`) || !strings.Contains(body, "You gave the first reading") {
		t.Error("the first reader is offered the second reading")
	}

	hash, _ := credential.Hash(testPassword, credential.TestParams)
	if _, err := a.store.CreateUser(ctx, cohort.System, db.NewUser{Email: "second@example.org", Name: "Second Investigator", Role: cohort.Investigator, PasswordHash: hash}); err != nil {
		t.Fatal(err)
	}
	second := a.client()
	if res := a.postForm(second, "/signin", url.Values{"email": {"second@example.org"}, "password": {testPassword}}); res.StatusCode != http.StatusSeeOther {
		t.Fatalf("second sign-in %d", res.StatusCode)
	}
	_, body = a.get(second, page)
	if !strings.Contains(body, `data-testid="readings-folded"`) || !strings.Contains(body, `value="second"`) {
		t.Error("the second reader does not get a blind second-reading form")
	}
	if res := a.postForm(second, post, url.Values{"role": {"second"}, "rhythm": {"flutter"}, "confidence": {"probable"}}); res.StatusCode != http.StatusSeeOther {
		t.Fatalf("second reading: status %d", res.StatusCode)
	}
	_, body = a.get(inv, page)
	if !strings.Contains(body, `data-testid="disagreement"`) || strings.Count(body, `class="differs"`) != 2 || !strings.Contains(body, `value="adjudication"`) {
		t.Error("the disagreement is not highlighted with an adjudication form")
	}
	_, body = a.get(inv, "/confirmations")
	if !strings.Contains(between(body, `data-testid="disagreed-table"`, "</table>"), page) {
		t.Error("the disagreement is not listed for adjudication")
	}
	if res := a.postForm(inv, post, url.Values{"role": {"adjudication"}, "rhythm": {"af"}, "confidence": {"certain"}}); res.StatusCode != http.StatusSeeOther {
		t.Fatalf("adjudication: status %d", res.StatusCode)
	}
	_, body = a.get(inv, page)
	if !strings.Contains(between(body, `data-testid="recording-verdict"`, "</h1>"), "atrial fibrillation") || !strings.Contains(body, "by one of the two readers") {
		t.Error("the adjudicated verdict is not shown")
	}
	var n int
	a.store.Pool().QueryRow(ctx, `SELECT count(*) FROM audit_events WHERE action = 'over_read.add'`).Scan(&n)
	if n != 3 {
		t.Errorf("%d readings audited", n)
	}

	// Statistics: one over-read AF episode, PPV 1/1 with the Wilson interval
	// from cohort/stats; monitors see the page and its downloads.
	wilson, _ := stats.ProportionCI(1, 1, 0.95, stats.Wilson)
	mon := a.signIn(cohort.Monitor)
	res, body = a.get(mon, "/confirmations/statistics")
	if res.StatusCode != http.StatusOK {
		t.Fatalf("statistics for a monitor: %d", res.StatusCode)
	}
	if !strings.Contains(body, "1/1 = 100.0%") || !strings.Contains(body, pct(wilson.Lo)+" – "+pct(wilson.Hi)) {
		t.Errorf("statistics do not show PPV 1/1 with Wilson %v", wilson)
	}
	for _, tbl := range []string{"versions", "groups", "km", "kappa"} {
		res, body := a.get(mon, "/confirmations/statistics.csv?table="+tbl)
		recs, err := csv.NewReader(strings.NewReader(body)).ReadAll()
		if res.StatusCode != http.StatusOK || !strings.HasPrefix(res.Header.Get("Content-Type"), "text/csv") || err != nil || len(recs) < 2 {
			t.Errorf("%s CSV: status %d, %d rows, %v", tbl, res.StatusCode, len(recs), err)
		}
	}
	if res, _ := a.get(mon, "/confirmations/statistics.csv?table=nothing"); res.StatusCode != http.StatusBadRequest {
		t.Errorf("unknown table: %d", res.StatusCode)
	}
	// Monitors: counts only on the confirmations page, no recording page.
	_, body = a.get(mon, "/confirmations")
	if !strings.Contains(body, `data-testid="deidentified-note"`) || strings.Contains(body, "RV-0001") || strings.Contains(body, "/recordings/") {
		t.Error("a monitor sees the confirmation lists")
	}
	if res, _ := a.get(mon, page); res.StatusCode != http.StatusForbidden {
		t.Errorf("monitor opening a recording: %d", res.StatusCode)
	}
}

// TestRecordingUnknownIDs: unknown recordings and cases answer 404.
func TestRecordingUnknownIDs(t *testing.T) {
	a := newApp(t)
	coord := a.signIn(cohort.Coordinator)
	for _, p := range []string{"/recordings/999999", "/recordings/abc", "/recordings/0"} {
		if res, _ := a.get(coord, p); res.StatusCode != http.StatusNotFound {
			t.Errorf("%s: %d", p, res.StatusCode)
		}
	}
	if res, _ := a.upload(coord, "/cases/999999/recordings", nil, "x.csv", []byte("mV\n1\n")); res.StatusCode != http.StatusNotFound {
		t.Errorf("recording for an unknown case: %d", res.StatusCode)
	}
	if res := a.postForm(a.signIn(cohort.Investigator), "/recordings/999999/over-reads", url.Values{"rhythm": {"af"}, "confidence": {"certain"}}); res.StatusCode != http.StatusNotFound {
		t.Errorf("over-read of an unknown recording: %d", res.StatusCode)
	}
}

// between returns the text after the first from up to the next to.
func between(s, from, to string) string {
	i := strings.Index(s, from)
	if i < 0 {
		return ""
	}
	s = s[i:]
	if j := strings.Index(s, to); j >= 0 {
		return s[:j]
	}
	return s
}

// TestRecordingNeedsShipment: an open case offers no intake form, says why,
// and refuses a posted recording.
func TestRecordingNeedsShipment(t *testing.T) {
	a := newApp(t)
	ids := seedFollowUp(t, a.store, 1)
	coord := a.signIn(cohort.Coordinator)
	_, body := a.get(coord, fmt.Sprintf("/cases/%d", ids[0]))
	if strings.Contains(body, `data-testid="form-recording"`) || !strings.Contains(body, "Record the recorder&#39;s shipment first") {
		t.Error("an open case offers the intake form")
	}
	res, body := a.upload(coord, fmt.Sprintf("/cases/%d/recordings", ids[0]), map[string]string{"duration_s": "40", "taken_at": time.Now().UTC().Format("2006-01-02T15:04")}, "x.csv", nil)
	if res.StatusCode != http.StatusUnprocessableEntity || !strings.Contains(body, "shipment first") {
		t.Errorf("status %d", res.StatusCode)
	}
	// Investigators see the recordings but get no intake form.
	_, body = a.get(a.signIn(cohort.Investigator), fmt.Sprintf("/cases/%d", ids[0]))
	if !strings.Contains(body, `data-testid="case-recordings"`) || strings.Contains(body, `data-testid="recording-closed"`) {
		t.Error("investigator's case page")
	}
}
