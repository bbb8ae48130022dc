package db_test

import (
	"context"
	"slices"
	"testing"
	"time"

	"cohortdesk/cohort/ecg"
	"cohortdesk/cohort/ecg/ecgtest"
	"cohortdesk/cohort/followup"
	"cohortdesk/cohort/overread"
	"cohortdesk/db"
)

// A recording with 20 s of flat line in 45 s has about 25 s usable: it is
// stored too short for a diagnostic read, its reading does not move the case
// to "over-read", and the figures' flag (too_short) agrees with the usable
// length, not the duration. Its file held one lead: there is no lead to
// switch to.
func TestUsableLengthDecidesDiagnostic(t *testing.T) {
	f, cases, _ := newRecordingFixture(t, 1)
	ctx := context.Background()
	syn, err := ecg.Synthesize(ecgtest.SinusRR(56, 800, 31), ecg.SynthOptions{RateHz: 250, Seed: 31})
	if err != nil {
		t.Fatal(err)
	}
	w := syn.Waveform
	w.Samples = slices.Clone(w.Samples)
	ecgtest.InjectFlat(&w, 10, 30, 0)
	rec, err := f.s.AddRecording(ctx, f.coord, cases["P1"], ecg.RecordingInput{TakenAt: fixedNow.Add(-time.Hour), File: ecgtest.EncodeCSV(w), Auto: overread.AutoSuggestsAF})
	if err != nil {
		t.Fatal(err)
	}
	if rec.DurationS < 44 || rec.UsableS > 26 || !rec.TooShort || rec.Hint.Quality == nil {
		t.Fatalf("stored duration %v usable %v too short %v", rec.DurationS, rec.UsableS, rec.TooShort)
	}
	var dur, usable float32
	var short bool
	if err := f.s.Pool().QueryRow(ctx, `SELECT duration_s, usable_s, too_short FROM recordings WHERE id = $1`, rec.ID).Scan(&dur, &usable, &short); err != nil || !short || usable >= 30 || dur < 30 {
		t.Fatalf("row: duration %v usable %v too short %v (%v)", dur, usable, short, err)
	}
	rec, err = f.s.AddOverRead(ctx, f.inv, rec.ID, db.OverReadInput{Rhythm: "af", Confidence: "certain", ReaderID: f.inv.UserID})
	if err != nil {
		t.Fatal(err)
	}
	if rec.Diagnostic() || f.get(cases["P1"]).State != followup.RecordingReceived {
		t.Errorf("a recording with 25 s usable counted as diagnostic")
	}
	if _, err := f.s.ChooseRecordingLead(ctx, f.coord, rec.ID, 1); err == nil {
		t.Error("a one-lead recording switched lead")
	} else {
		fieldMsg(t, err, "lead")
	}
}

// A recording stored before the quality check (no usable length, no list
// of signals) reads back with its duration as usable length, and the
// database keeps too_short in step with the duration for it.
func TestRecordingStoredBeforeTheQualityCheck(t *testing.T) {
	f, cases, _ := newRecordingFixture(t, 1)
	ctx := context.Background()
	var id int64
	err := f.s.Pool().QueryRow(ctx, `INSERT INTO recordings (case_id, participant_id, taken_at, duration_s, too_short)
		SELECT id, participant_id, $2, 32, false FROM cases WHERE id = $1 RETURNING id`, cases["P1"], fixedNow).Scan(&id)
	if err != nil {
		t.Fatal(err)
	}
	rec, err := f.s.Recording(ctx, id)
	if err != nil {
		t.Fatal(err)
	}
	if rec.UsableS != 32 || rec.TooShort || rec.Signals != nil || rec.Lead != -1 {
		t.Errorf("read back: usable %v too short %v signals %v lead %d", rec.UsableS, rec.TooShort, rec.Signals, rec.Lead)
	}
	if _, err := f.s.Pool().Exec(ctx, `UPDATE recordings SET too_short = true WHERE id = $1`, id); err == nil {
		t.Error("too_short set on a 32 s recording without a usable length")
	}
	if _, err := f.s.Pool().Exec(ctx, `UPDATE recordings SET usable_s = 20, too_short = true WHERE id = $1`, id); err != nil {
		t.Errorf("20 s usable of 32: %v", err)
	}
}
