package web

import (
	"context"
	"fmt"
	"math"
	"net/http"
	"net/url"
	"slices"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/ecg"
	"cohortdesk/cohort/ecg/ecgtest"
	"cohortdesk/cohort/overread"
)

// threeSignalEDF is an accelerometer, lead II and lead I (the latter two of
// one synthetic ECG, lead II taller), in that order.
func threeSignalEDF(t *testing.T) ([]byte, int) {
	t.Helper()
	syn, err := ecg.Synthesize(ecgtest.SinusRR(45, 800, 21), ecg.SynthOptions{RateHz: 250, Seed: 21})
	if err != nil {
		t.Fatal(err)
	}
	w := syn.Waveform
	taller := w
	taller.Samples = make([]float64, len(w.Samples))
	for i, v := range w.Samples {
		taller.Samples[i] = 1.5 * v
	}
	acc := make([]float64, len(w.Samples))
	for i := range acc {
		acc[i] = 0.3 * math.Sin(float64(i)/40)
	}
	b, err := ecgtest.EncodeEDFChannels([]ecgtest.EDFChannel{
		{Label: "Accel X", Dimension: "g", Values: acc, RateHz: 250},
		ecgtest.ECGChannel(taller, "ECG II", "uV"),
		ecgtest.ECGChannel(w, "ECG I", "mV"),
	}, time.Time{}, ecgtest.EDFWriteOptions{})
	if err != nil {
		t.Fatal(err)
	}
	return b, len(syn.RTimes)
}

// TestRecordingLeadsAndSignals: an EDF file of three signals with the ECG
// leads second and third is accepted through the case form; the page shows
// lead I on the strip, lists the three signals, and offers the choice of
// lead. Switching to lead II is stored and audited; once a reading is
// entered the lead no longer changes, and the page says why.
func TestRecordingLeadsAndSignals(t *testing.T) {
	a := newApp(t)
	ids := shippedCases(t, a, 1)
	coord := a.signIn(cohort.Coordinator)
	b, beats := threeSignalEDF(t)
	taken := time.Now().UTC().Format("2006-01-02T15:04")
	res, body := a.upload(coord, fmt.Sprintf("/cases/%d/recordings", ids[0]), map[string]string{"taken_at": taken, "auto": string(overread.AutoSuggestsRegular)}, "three.edf", b)
	if res.StatusCode != http.StatusSeeOther {
		t.Fatalf("upload: %d\n%.2000s", res.StatusCode, body)
	}
	id := recordingIDFrom(t, res)
	page := fmt.Sprintf("/recordings/%d", id)
	_, body = a.get(coord, page)
	for _, want := range []string{`data-testid="recording-lead">ECG I<`, `data-testid="recording-signals"`, "Accel X", "motion",
		`data-testid="form-lead"`, fmt.Sprintf("ECG II: %d beats", beats), "on the strip"} {
		if !strings.Contains(body, want) {
			t.Errorf("page lacks %q", want)
		}
	}
	rec, err := a.store.Recording(context.Background(), id)
	if err != nil {
		t.Fatal(err)
	}
	if len(rec.Leads) != 2 || rec.Lead != 1 || len(rec.Signals) != 3 || len(rec.Beats) != beats {
		t.Fatalf("stored: %d leads, shown %d, %d signals, %d beats", len(rec.Leads), rec.Lead, len(rec.Signals), len(rec.Beats))
	}
	wfI, _ := a.store.RecordingWaveform(context.Background(), id)

	// Switch to lead II (index 0): the strip's samples are lead II's.
	res = a.postForm(coord, page+"/lead", url.Values{"lead": {"0"}})
	if res.StatusCode != http.StatusSeeOther {
		t.Fatalf("lead change: %d", res.StatusCode)
	}
	_, body = a.get(coord, page+"?done=lead")
	if !strings.Contains(body, `data-testid="recording-lead">ECG II<`) || !strings.Contains(body, "Lead changed") {
		t.Errorf("page after the change does not show lead II")
	}
	wfII, _ := a.store.RecordingWaveform(context.Background(), id)
	if wfII.Label != "ECG II" || len(wfII.Samples) != len(wfI.Samples) || math.Abs(peak(wfII.Samples)/peak(wfI.Samples)-1.5) > 0.01 {
		t.Errorf("lead II samples: label %q, peak ratio %.3f (want 1.5)", wfII.Label, peak(wfII.Samples)/peak(wfI.Samples))
	}
	var old, nu string
	err = a.store.Pool().QueryRow(context.Background(), `SELECT old_value::text, new_value::text FROM audit_events
		WHERE action = 'recording.lead' AND object_id = $1`, fmt.Sprint(id)).Scan(&old, &nu)
	if err != nil || !strings.Contains(old, `"ECG I"`) || !strings.Contains(nu, `"ECG II"`) {
		t.Errorf("audit event: old %s new %s (%v)", old, nu, err)
	}

	// A reading fixes the lead.
	inv := a.signIn(cohort.Investigator)
	res = a.postForm(inv, page+"/over-reads", url.Values{"role": {"first"}, "rhythm": {"sinus"}, "confidence": {"certain"}})
	if res.StatusCode != http.StatusSeeOther {
		t.Fatalf("over-read: %d", res.StatusCode)
	}
	_, body = a.get(coord, page)
	if strings.Contains(body, `data-testid="form-lead"`) || !strings.Contains(body, "a reading was made on lead ECG II") {
		t.Errorf("after a reading the lead form is still offered, or the page does not say why")
	}
	res, body = a.postFormBody(coord, page+"/lead", url.Values{"lead": {"1"}})
	if res.StatusCode != http.StatusUnprocessableEntity || !strings.Contains(body, "can no longer change") {
		t.Errorf("lead change after a reading: %d", res.StatusCode)
	}
}

func peak(x []float64) float64 {
	m := 0.0
	for _, v := range x {
		m = math.Max(m, v)
	}
	return m
}

// TestRecordingWFDBAndQuality: a WFDB record uploaded as its header and
// signal file together is stored as "WFDB"; its 15 s of flat line are
// hatched on the strip and counted out of the usable length, which makes
// the 40 s recording too short for a diagnostic read.
func TestRecordingWFDBAndQuality(t *testing.T) {
	a := newApp(t)
	ids := shippedCases(t, a, 1)
	coord := a.signIn(cohort.Coordinator)
	syn, err := ecg.Synthesize(ecgtest.SinusRR(50, 800, 22), ecg.SynthOptions{RateHz: 360, Seed: 22})
	if err != nil {
		t.Fatal(err)
	}
	syn.Waveform.Samples = slices.Clone(syn.Waveform.Samples)
	ecgtest.InjectFlat(&syn.Waveform, 10, 25, 0)
	files, err := ecgtest.ECGWFDB("r9", syn, 212, nil)
	if err != nil {
		t.Fatal(err)
	}
	res, body := a.postMultipart(coord, fmt.Sprintf("/cases/%d/recordings", ids[0]), [][2]string{{"taken_at", time.Now().UTC().Format("2006-01-02T15:04")}},
		"waveform", []namedFile{{"r9.hea", files.Header}, {"r9.dat", files.Signal}})
	if res.StatusCode != http.StatusSeeOther {
		t.Fatalf("upload: %d\n%.2000s", res.StatusCode, body)
	}
	id := recordingIDFrom(t, res)
	_, body = a.get(coord, fmt.Sprintf("/recordings/%d", id))
	for _, want := range []string{"WFDB, 360 Hz", `data-testid="strip-excluded"`, "excluded: flat line", "flat line 15 s",
		"under 30 s usable", `data-testid="too-short"`} {
		if !strings.Contains(body, want) {
			t.Errorf("page lacks %q", want)
		}
	}
	rec, _ := a.store.Recording(context.Background(), id)
	if !rec.TooShort || rec.UsableS > 26 || rec.DurationS < 40 || rec.Format != "wfdb" {
		t.Errorf("stored: too short %v, usable %v of %v s, format %q", rec.TooShort, rec.UsableS, rec.DurationS, rec.Format)
	}
}
