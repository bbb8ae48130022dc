package demoload

import (
	"context"
	"fmt"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/demo"
	"cohortdesk/cohort/ecg"
	"cohortdesk/cohort/overread"
	"cohortdesk/db"
	"cohortdesk/web/referralissue"
)

// synthRecording makes the waveform of a scripted recording with the
// dynamical ECG model (cohort/ecg): it lasts the script's seconds, its beats
// fall at the script's times, with breathing wander, and heavy noise when the
// script says an over-reader could not read it.
func synthRecording(r demo.Recording, seed uint64) (ecg.Waveform, error) {
	rr := make([]float64, len(r.RR))
	for i, s := range r.RR {
		rr[i] = s * 1000
	}
	o := ecg.SynthOptions{RateHz: 300, WanderMV: 0.08, WanderHz: 0.22, Seed: seed, FirstBeatS: r.FirstBeat, Seconds: r.Seconds}
	if r.Noisy {
		o.Noise, o.SNRdB = true, -6
	}
	syn, err := ecg.Synthesize(rr, o)
	if err != nil {
		return ecg.Waveform{}, err
	}
	return syn.Waveform, nil
}

// addRecording enters a scripted recording as the study would: the waveform
// arrives, is checked and analysed, and the case moves to "recording received".
func addRecording(ctx context.Context, cs *db.Store, a cohort.Actor, caseID int64, r demo.Recording, seed uint64) (int64, error) {
	w, err := synthRecording(r, seed)
	if err != nil {
		return 0, err
	}
	rec, err := cs.AddRecording(ctx, a, caseID, ecg.RecordingInput{TakenAt: r.Taken, ReceivedAt: r.Received, Auto: r.Auto,
		Samples: w.Samples, RateHz: w.RateHz})
	if err != nil {
		return 0, fmt.Errorf("recording: %w", err)
	}
	return rec.ID, nil
}

// addOverRead enters the scripted clinician's reading.
func addOverRead(ctx context.Context, cs *db.Store, reader db.User, recID int64, r demo.Recording, loc *time.Location) error {
	_, err := cs.AddOverRead(ctx, reader.Actor("", "demo"), recID, db.OverReadInput{Rhythm: r.OverRead,
		Confidence: overread.Certain, ReaderID: reader.ID, ReadOn: cohort.DateOf(r.ReadAt.In(loc))})
	if err != nil {
		return fmt.Errorf("over-read: %w", err)
	}
	return nil
}

// refer issues the case's referral summary (as the app issues it) and has
// the investigator sign it off, which moves the case to "referred".
func refer(ctx context.Context, cs *db.Store, issuer cohort.Actor, signer db.User, c db.Case, secret []byte, at time.Time) error {
	d, err := referralissue.Prepare(ctx, cs, c.ParticipantID, c.ID, secret, at)
	if err != nil {
		return err
	}
	if !d.Basis.ConfirmedAF() {
		return fmt.Errorf("the script refers case %d, whose over-read is not atrial fibrillation", c.ID)
	}
	ref, _, err := referralissue.Record(ctx, cs, issuer, d, "pdf", string(demo.Paper))
	if err != nil {
		return fmt.Errorf("issue referral: %w", err)
	}
	if _, err := referralissue.SignOff(ctx, cs, signer.Actor("", "demo"), ref.ID); err != nil {
		return fmt.Errorf("sign off referral: %w", err)
	}
	return nil
}
