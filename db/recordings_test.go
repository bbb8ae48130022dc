package db_test

import (
	"context"
	"errors"
	"fmt"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/ecg"
	"cohortdesk/cohort/ecg/ecgtest"
	"cohortdesk/cohort/followup"
	"cohortdesk/cohort/overread"
	"cohortdesk/db"
)

// identCanary is written into the EDF patient and recording identification
// fields; it must never reach the database.
const identCanary = "Quillonby-Marsh"

// synth makes a synthetic sinus ECG of about seconds at rate Hz, with its true
// beat count.
func synth(t *testing.T, seconds, rate float64, seed uint64) (ecg.Waveform, int) {
	t.Helper()
	n := int(seconds / 0.8)
	syn, err := ecg.Synthesize(ecgtest.SinusRR(n, 800, seed), ecg.SynthOptions{RateHz: rate})
	if err != nil {
		t.Fatal(err)
	}
	return syn.Waveform, len(syn.RTimes)
}

func edfOf(t *testing.T, w ecg.Waveform, plus bool) []byte {
	t.Helper()
	b, err := ecgtest.EncodeEDF(w, ecgtest.EDFWriteOptions{Plus: plus, Patient: identCanary + " F 02-MAR-1951", Recording: "Startdate 01-JUN-2026 " + identCanary})
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// toRecorderSent moves a participant's case to "recorder sent" through the
// case actions and returns its id.
func (f *caseFixture) toRecorderSent(studyID string) int64 {
	f.t.Helper()
	ctx := context.Background()
	id := f.caseID(studyID)
	c, err := f.s.LogAttempt(ctx, f.coord, id, db.AttemptInput{Version: f.get(id).Version, Channel: "phone", Outcome: "reached"})
	if err != nil {
		f.t.Fatal(err)
	}
	if _, err := f.s.RecordShipment(ctx, f.coord, id, c.Version, cohort.DateOf(f.clock.now()), "TRK1"); err != nil {
		f.t.Fatal(err)
	}
	return id
}

// recordingFixture is a case fixture with one case in "recorder sent" per
// participant and a second investigator.
func newRecordingFixture(t *testing.T, n int) (*caseFixture, map[string]int64, cohort.Actor) {
	t.Helper()
	f := newCaseFixture(t, n)
	cases := map[string]int64{}
	for i := 1; i <= n; i++ {
		f.positive(f.proto, fmt.Sprintf("P%d", i), 2)
	}
	f.sync()
	for i := 1; i <= n; i++ {
		sid := fmt.Sprintf("P%d", i)
		cases[sid] = f.toRecorderSent(sid)
	}
	u, err := f.s.CreateUser(context.Background(), cohort.System, db.NewUser{Email: "second@example.org", Name: "Second Reader", Role: cohort.Investigator, PasswordHash: "x"})
	if err != nil {
		t.Fatal(err)
	}
	return f, cases, u.Actor("127.0.0.1", "test")
}

func fieldMsg(t *testing.T, err error, field string) string {
	t.Helper()
	var ve *cohort.ValidationError
	if !errors.As(err, &ve) {
		t.Fatalf("got %v, want a validation error on %q", err, field)
	}
	if ve.Fields[field] == "" {
		t.Fatalf("got %v, want a message on %q", ve, field)
	}
	return ve.Fields[field]
}

// TestAddRecordingFiles stores an EDF, an EDF+ and a CSV recording: the beats
// are found (synthetic ECG with known beats, McSharry et al. 2003 model), the
// hint is stored, the case moves to "recording received", the event is
// audited, and the EDF identification fields are stored nowhere.
func TestAddRecordingFiles(t *testing.T) {
	f, cases, _ := newRecordingFixture(t, 3)
	ctx := context.Background()
	taken := fixedNow.Add(-time.Hour)
	for _, tc := range []struct {
		sid, format string
		file        func(ecg.Waveform) []byte
	}{
		{"P1", "edf", func(w ecg.Waveform) []byte { return edfOf(t, w, false) }},
		{"P2", "edf+", func(w ecg.Waveform) []byte { return edfOf(t, w, true) }},
		{"P3", "csv", ecgtest.EncodeCSV},
	} {
		t.Run(tc.format, func(t *testing.T) {
			w, want := synth(t, 40, 250, 3)
			rec, err := f.s.AddRecording(ctx, f.coord, cases[tc.sid], ecg.RecordingInput{TakenAt: taken, Auto: overread.AutoSuggestsRegular, File: tc.file(w), FileName: "strip." + tc.format})
			if err != nil {
				t.Fatal(err)
			}
			if rec.Format != tc.format || rec.TooShort || rec.Auto != overread.AutoSuggestsRegular || rec.RateHz != 250 {
				t.Errorf("stored %+v", rec)
			}
			if got := len(rec.Beats); got != want || rec.Hint.Beats != want {
				t.Errorf("%d beats stored (hint %d), want %d", got, rec.Hint.Beats, want)
			}
			if !strings.HasPrefix(rec.Hint.Text, "Hint for the over-reader, not a verdict") || rec.Hint.Summary.Segments != 1 || rec.Hint.Summary.AFLike != 0 {
				t.Errorf("hint %+v", rec.Hint)
			}
			if rec.DurationS < 39 || rec.DurationS > 42 {
				t.Errorf("duration %v", rec.DurationS)
			}
			if st := f.get(cases[tc.sid]).State; st != followup.RecordingReceived {
				t.Errorf("case state %s", st)
			}
			wf, err := f.s.RecordingWaveform(ctx, rec.ID)
			// EDF pads the last 1 s data record (ecgtest.EncodeEDF), so up to 250 more.
			if err != nil || len(wf.Samples) < len(w.Samples) || len(wf.Samples) > len(w.Samples)+250 || wf.RateHz != 250 {
				t.Errorf("waveform %d samples at %v Hz, %v", len(wf.Samples), wf.RateHz, err)
			}
			if n := f.count(`SELECT count(*) FROM audit_events WHERE action = 'recording.add' AND object_id = $1`, fmt.Sprint(rec.ID)); n != 1 {
				t.Errorf("%d audit events", n)
			}
		})
	}
	if n := f.count(`SELECT count(*) FROM audit_events WHERE action = 'case.advance'`); n != 3 {
		t.Errorf("%d case advances audited, want 3", n)
	}
	if n := f.count(`SELECT count(*) FROM recordings r WHERE concat_ws(' ', r.file_name, r.source, r.lead_label, r.hint::text, encode(r.samples, 'escape')) LIKE '%' || $1 || '%'`, identCanary); n != 0 {
		t.Errorf("EDF identification stored in %d recordings", n)
	}
	if n := f.count(`SELECT count(*) FROM audit_events WHERE concat_ws(' ', old_value::text, new_value::text) LIKE '%' || $1 || '%'`, identCanary); n != 0 {
		t.Errorf("EDF identification in %d audit events", n)
	}
}

// TestAddRecordingRefusals: each bad input is refused with a message that
// says what and where, and nothing is stored: no recording, no audit event,
// no move of the case.
func TestAddRecordingRefusals(t *testing.T) {
	f, cases, _ := newRecordingFixture(t, 1)
	ctx := context.Background()
	id := cases["P1"]
	w, _ := synth(t, 40, 250, 4)
	good := edfOf(t, w, false)
	badSignals := append([]byte(nil), good...)
	copy(badSignals[252:256], "x1  ") // number of signals, header bytes 252-255 (EDF specification)
	badPhys := append([]byte(nil), good...)
	// physical minimum of signal 1: fixed header 256 bytes, then label 16,
	// transducer 80, dimension 8 per signal; one signal, so byte 360.
	copy(badPhys[360:368], "minus 1 ")
	low, _ := synth(t, 40, 250, 5)
	low.RateHz = 50 // same samples declared at 50 Hz: below the 100 Hz floor
	open := f.caseID("P1")
	before := f.count(`SELECT count(*) FROM audit_events`)
	for _, tc := range []struct {
		name   string
		caseID int64
		in     ecg.RecordingInput
		field  string
		want   []string // words the message must contain
	}{
		{"edf number of signals", id, ecg.RecordingInput{TakenAt: fixedNow, File: badSignals}, "waveform", []string{"number of signals", "byte 252"}},
		{"edf physical minimum", id, ecg.RecordingInput{TakenAt: fixedNow, File: badPhys}, "waveform", []string{"physical minimum", "byte 360", "signal 1"}},
		{"edf truncated", id, ecg.RecordingInput{TakenAt: fixedNow, File: good[:len(good)/2]}, "waveform", []string{"EDF"}},
		{"csv bad line", id, ecg.RecordingInput{TakenAt: fixedNow, File: []byte("# sampling_rate_hz=250\nmV\n0.1\n0.2\nabc\n0.3\n")}, "waveform", []string{"line 5"}},
		{"csv no rate", id, ecg.RecordingInput{TakenAt: fixedNow, File: []byte("mV\n0.1\n0.2\n")}, "waveform", []string{"rate"}},
		{"rate too low", id, ecg.RecordingInput{TakenAt: fixedNow, Samples: low.Samples, RateHz: low.RateHz}, "waveform", []string{"50 Hz"}},
		{"no duration", id, ecg.RecordingInput{TakenAt: fixedNow}, "duration_s", []string{"duration"}},
		{"no time", id, ecg.RecordingInput{DurationS: 40}, "taken_at", []string{"taken"}},
		{"future", id, ecg.RecordingInput{TakenAt: fixedNow.Add(time.Hour), DurationS: 40}, "taken_at", []string{"future"}},
		{"before the flag", id, ecg.RecordingInput{TakenAt: fixedNow.AddDate(0, 0, -3), DurationS: 40}, "taken_at", []string{"flagged"}},
		{"bad auto", id, ecg.RecordingInput{TakenAt: fixedNow, DurationS: 40, Auto: "maybe"}, "auto", []string{"readings of the recorder"}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := f.s.AddRecording(ctx, f.coord, tc.caseID, tc.in)
			msg := fieldMsg(t, err, tc.field)
			t.Logf("%s: %s", tc.field, msg)
			for _, w := range tc.want {
				if !strings.Contains(msg, w) {
					t.Errorf("message %q does not say %q", msg, w)
				}
			}
		})
	}
	if n := f.count(`SELECT count(*) FROM recordings`); n != 0 {
		t.Errorf("%d recordings stored", n)
	}
	if n := f.count(`SELECT count(*) FROM audit_events`); n != before {
		t.Errorf("%d audit events written", n-before)
	}
	if st := f.get(open).State; st != followup.RecorderSent {
		t.Errorf("case moved to %s", st)
	}
	// The same file twice: the second is refused.
	if _, err := f.s.AddRecording(ctx, f.coord, id, ecg.RecordingInput{TakenAt: fixedNow, File: good}); err != nil {
		t.Fatal(err)
	}
	_, err := f.s.AddRecording(ctx, f.coord, id, ecg.RecordingInput{TakenAt: fixedNow, File: good})
	if msg := fieldMsg(t, err, "waveform"); !strings.Contains(msg, "already stored") {
		t.Errorf("duplicate: %q", msg)
	}
	if _, err := f.s.AddRecording(ctx, f.coord, 999999, ecg.RecordingInput{TakenAt: fixedNow, DurationS: 40}); !errors.Is(err, cohort.ErrNotFound) {
		t.Errorf("unknown case: %v", err)
	}
}

// TestAddRecordingNeedsShipment: a case nobody has shipped a recorder for
// takes no recording.
func TestAddRecordingNeedsShipment(t *testing.T) {
	f := newCaseFixture(t, 1)
	f.positive(f.proto, "P1", 2)
	f.sync()
	_, err := f.s.AddRecording(context.Background(), f.coord, f.caseID("P1"), ecg.RecordingInput{TakenAt: fixedNow, DurationS: 40})
	if msg := fieldMsg(t, err, "case"); !strings.Contains(msg, "shipment") {
		t.Errorf("message %q", msg)
	}
}

// TestShortRecording: under 30 s (2020 ESC AF guidelines, verified,
// secondary) is accepted and marked; a reading of it is kept but does not
// move the case on.
func TestShortRecording(t *testing.T) {
	f, cases, _ := newRecordingFixture(t, 1)
	ctx := context.Background()
	w, _ := synth(t, 20, 500, 6)
	rec, err := f.s.AddRecording(ctx, f.coord, cases["P1"], ecg.RecordingInput{TakenAt: fixedNow, File: ecgtest.EncodeCSV(w), Auto: overread.AutoSuggestsAF})
	if err != nil {
		t.Fatal(err)
	}
	if !rec.TooShort || rec.DurationS >= 30 {
		t.Fatalf("short recording stored as %+v", rec)
	}
	rec, err = f.s.AddOverRead(ctx, f.inv, rec.ID, db.OverReadInput{Rhythm: "af", Confidence: "probable", ReaderID: f.inv.UserID})
	if err != nil {
		t.Fatal(err)
	}
	if !rec.Conclusion.Final || rec.Diagnostic() {
		t.Errorf("verdict %+v, diagnostic %v", rec.Conclusion, rec.Diagnostic())
	}
	if st := f.get(cases["P1"]).State; st != followup.RecordingReceived {
		t.Errorf("case moved to %s on a strip under 30 s", st)
	}
}

// TestDoubleReadingAndAdjudication walks a recording through a first
// reading, a refused second reading by the same person, a disagreeing second
// reading, the confirmations lists and an adjudication; the case moves to
// "over-read" once, with the first interpretable verdict.
func TestDoubleReadingAndAdjudication(t *testing.T) {
	f, cases, second := newRecordingFixture(t, 2)
	ctx := context.Background()
	f.clock.set(fixedNow.Add(48 * time.Hour))
	rec, err := f.s.AddRecording(ctx, f.coord, cases["P1"], ecg.RecordingInput{TakenAt: fixedNow.Add(time.Hour), DurationS: 45, Auto: overread.AutoSuggestsAF})
	if err != nil {
		t.Fatal(err)
	}
	conf, err := f.s.Confirmations(ctx, 10)
	if err != nil || len(conf.Unread) != 1 || conf.Unread[0].ID != rec.ID {
		t.Fatalf("unread list %+v %v", conf.Unread, err)
	}
	// A coordinator cannot be the reader.
	_, err = f.s.AddOverRead(ctx, f.coord, rec.ID, db.OverReadInput{Role: "first", Rhythm: "af", Confidence: "certain", ReaderID: f.coord.UserID})
	fieldMsg(t, err, "reader")
	day := cohort.DateOf(fixedNow.Add(24 * time.Hour))
	rec, err = f.s.AddOverRead(ctx, f.inv, rec.ID, db.OverReadInput{Role: "first", Rhythm: "af", Confidence: "certain", Comment: "coarse f-waves", ReaderID: f.inv.UserID, ReadOn: day})
	if err != nil {
		t.Fatal(err)
	}
	c := f.get(cases["P1"])
	if c.State != followup.OverRead || cohort.DateOf(c.OverReadAt) != day {
		t.Fatalf("case %s, over-read at %v", c.State, c.OverReadAt)
	}
	_, err = f.s.AddOverRead(ctx, f.inv, rec.ID, db.OverReadInput{Role: "second", Rhythm: "af", Confidence: "certain", ReaderID: f.inv.UserID})
	fieldMsg(t, err, "reader")
	_, err = f.s.AddOverRead(ctx, f.inv, rec.ID, db.OverReadInput{Role: "first", Rhythm: "af", Confidence: "certain", ReaderID: second.UserID})
	fieldMsg(t, err, "role")
	rec, err = f.s.AddOverRead(ctx, second, rec.ID, db.OverReadInput{Role: "second", Rhythm: "flutter", Confidence: "probable", ReaderID: second.UserID})
	if err != nil {
		t.Fatal(err)
	}
	if rec.Conclusion.Status != overread.Disagreed || rec.Conclusion.Final {
		t.Fatalf("verdict %+v", rec.Conclusion)
	}
	conf, err = f.s.Confirmations(ctx, 10)
	if err != nil || len(conf.Unread) != 0 || len(conf.Disagreed) != 1 || len(conf.Disagreed[0].Readings) != 2 || len(conf.Recent) != 2 {
		t.Fatalf("lists %+v %v", conf, err)
	}
	rec, err = f.s.AddOverRead(ctx, f.inv, rec.ID, db.OverReadInput{Role: "adjudication", Rhythm: "flutter", Confidence: "certain", ReaderID: f.inv.UserID})
	if err != nil {
		t.Fatal(err)
	}
	if rec.Conclusion.Status != overread.Adjudicated || rec.Conclusion.Rhythm != overread.Flutter {
		t.Fatalf("verdict %+v", rec.Conclusion)
	}
	if _, err = f.s.AddOverRead(ctx, f.inv, rec.ID, db.OverReadInput{Rhythm: "af", Confidence: "certain", ReaderID: f.inv.UserID}); err == nil {
		t.Fatal("a fourth reading was accepted")
	}
	if n := f.count(`SELECT count(*) FROM audit_events WHERE action = 'over_read.add' AND object_id = $1`, fmt.Sprint(rec.ID)); n != 3 {
		t.Errorf("%d readings audited, want 3", n)
	}
	if n := f.count(`SELECT count(*) FROM audit_events WHERE action = 'case.advance' AND object_id = $1`, fmt.Sprint(cases["P1"])); n != 2 {
		t.Errorf("%d case moves audited, want 2 (recording received, over-read)", n)
	}

	// Uninterpretable first: the case waits; a disagreeing second reader and
	// an adjudication to sinus rhythm then move it.
	rec2, err := f.s.AddRecording(ctx, f.coord, cases["P2"], ecg.RecordingInput{TakenAt: fixedNow.Add(time.Hour), DurationS: 35})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := f.s.AddOverRead(ctx, f.inv, rec2.ID, db.OverReadInput{Rhythm: "uninterpretable", Confidence: "certain", ReaderID: f.inv.UserID}); err != nil {
		t.Fatal(err)
	}
	if st := f.get(cases["P2"]).State; st != followup.RecordingReceived {
		t.Fatalf("uninterpretable moved the case to %s", st)
	}
	if _, err := f.s.AddOverRead(ctx, second, rec2.ID, db.OverReadInput{Rhythm: "sinus", Confidence: "certain", ReaderID: second.UserID}); err != nil {
		t.Fatal(err)
	}
	if st := f.get(cases["P2"]).State; st != followup.RecordingReceived {
		t.Fatalf("a disagreement moved the case to %s", st)
	}
	if _, err := f.s.AddOverRead(ctx, f.inv, rec2.ID, db.OverReadInput{Rhythm: "sinus", Confidence: "certain", ReaderID: f.inv.UserID}); err != nil {
		t.Fatal(err)
	}
	if st := f.get(cases["P2"]).State; st != followup.OverRead {
		t.Fatalf("adjudicated sinus left the case in %s", st)
	}
	// Date rules.
	rec3, err := f.s.AddRecording(ctx, f.coord, cases["P2"], ecg.RecordingInput{TakenAt: fixedNow.Add(2 * time.Hour), DurationS: 35})
	if err != nil {
		t.Fatal(err)
	}
	_, err = f.s.AddOverRead(ctx, f.inv, rec3.ID, db.OverReadInput{Rhythm: "sinus", Confidence: "certain", ReaderID: f.inv.UserID, ReadOn: cohort.DateOf(fixedNow.AddDate(0, 0, 5))})
	fieldMsg(t, err, "read_on")
	_, err = f.s.AddOverRead(ctx, f.inv, rec3.ID, db.OverReadInput{Rhythm: "sinus", Confidence: "certain", ReaderID: f.inv.UserID, ReadOn: cohort.DateOf(fixedNow.AddDate(0, 0, -1))})
	fieldMsg(t, err, "read_on")
	if _, err := f.s.AddOverRead(ctx, f.inv, 999999, db.OverReadInput{Rhythm: "sinus", Confidence: "certain", ReaderID: f.inv.UserID}); !errors.Is(err, cohort.ErrNotFound) {
		t.Errorf("unknown recording: %v", err)
	}
}

// TestLoaderPath adds a recording from raw samples with past times and an
// over-read with a given reader and date, as a demo loader would, without
// HTTP; the case's times follow the given ones.
func TestLoaderPath(t *testing.T) {
	f, cases, second := newRecordingFixture(t, 1)
	ctx := context.Background()
	f.clock.set(fixedNow.AddDate(0, 0, 10))
	loader := cohort.Actor{Name: "demo loader"}
	w, want := synth(t, 60, 500, 8)
	taken, received := fixedNow.Add(30*time.Hour), fixedNow.Add(80*time.Hour)
	rec, err := f.s.AddRecording(ctx, loader, cases["P1"], ecg.RecordingInput{TakenAt: taken, ReceivedAt: received, Auto: overread.AutoSuggestsRegular, Samples: w.Samples, RateHz: w.RateHz})
	if err != nil {
		t.Fatal(err)
	}
	if rec.Format != "samples" || len(rec.Beats) != want || !rec.TakenAt.Equal(taken) || !rec.ReceivedAt.Equal(received) {
		t.Fatalf("stored %s with %d beats (want %d), taken %v received %v", rec.Format, len(rec.Beats), want, rec.TakenAt, rec.ReceivedAt)
	}
	if c := f.get(cases["P1"]); !c.RecordingBackAt.Equal(received) {
		t.Errorf("recording back at %v, want %v", c.RecordingBackAt, received)
	}
	on := cohort.DateOf(fixedNow.AddDate(0, 0, 5))
	rec, err = f.s.AddOverRead(ctx, loader, rec.ID, db.OverReadInput{Rhythm: "sinus", Confidence: "certain", ReaderID: second.UserID, ReadOn: on})
	if err != nil {
		t.Fatal(err)
	}
	if rec.Readings[0].Reader != "Second Reader" || rec.Readings[0].CreatedBy != "demo loader" || rec.Readings[0].On != on {
		t.Errorf("reading %+v", rec.Readings[0])
	}
	if c := f.get(cases["P1"]); c.State != followup.OverRead || cohort.DateOf(c.OverReadAt) != on {
		t.Errorf("case %s over-read at %v", c.State, c.OverReadAt)
	}
	recs, err := f.s.CaseRecordings(ctx, cases["P1"])
	if err != nil || len(recs) != 1 || !recs[0].Diagnostic() {
		t.Fatalf("case recordings %+v %v", recs, err)
	}
}

// TestConcurrentFirstReadings: two investigators entering the first reading
// at once: the recording row lock lets one in and refuses the other.
func TestConcurrentFirstReadings(t *testing.T) {
	f, cases, second := newRecordingFixture(t, 1)
	ctx := context.Background()
	rec, err := f.s.AddRecording(ctx, f.coord, cases["P1"], ecg.RecordingInput{TakenAt: fixedNow, DurationS: 40})
	if err != nil {
		t.Fatal(err)
	}
	errs := make(chan error, 2)
	for _, a := range []cohort.Actor{f.inv, second} {
		go func() {
			_, err := f.s.AddOverRead(ctx, a, rec.ID, db.OverReadInput{Role: "first", Rhythm: "sinus", Confidence: "certain", ReaderID: a.UserID})
			errs <- err
		}()
	}
	var ok, refused int
	for range 2 {
		if err := <-errs; err == nil {
			ok++
		} else if strings.Contains(fieldMsg(t, err, "role"), "second reading") {
			refused++
		}
	}
	if ok != 1 || refused != 1 {
		t.Fatalf("%d accepted, %d refused", ok, refused)
	}
}
