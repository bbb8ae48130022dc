package demoload

import (
	"testing"
	"time"

	"cohortdesk/cohort/demo"
	"cohortdesk/cohort/ecg"
)

// TestScriptedRecordingsKeepTheirLength synthesises every scripted recording
// of demo studies as the loader does and takes it through the app's intake:
// the waveform lasts the scripted seconds, so the app's 30 s rule
// (ecg.MinDiagnosticSeconds, from the 2020 ESC AF guidelines) marks a
// recording too short exactly when the script made it short on purpose, and
// the script's referrals of diagnostic recordings are not refused. Seed 7 at
// 1,200 participants scripts a recording of exactly 30 s that used to come out
// just under (case QRW-0128-F).
func TestScriptedRecordingsKeepTheirLength(t *testing.T) {
	type size struct {
		seed         uint64
		participants int
	}
	sizes := []size{{7, 1200}, {7, 80}, {1, 300}}
	if testing.Short() {
		sizes = sizes[:1]
	}
	for _, sz := range sizes {
		st, err := demo.New(demo.Config{Seed: sz.seed, Participants: sz.participants})
		if err != nil {
			t.Fatal(err)
		}
		n, exact30 := 0, 0
		for ci, f := range st.PlanFollowUps(st.ExpectedCases()) {
			for ri, r := range f.Recordings {
				w, err := synthRecording(r, uint64(ci)*31+uint64(ri))
				if err != nil {
					t.Fatalf("seed %d, %d participants, %s recording %d: %v", sz.seed, sz.participants, f.Case.StudyID, ri, err)
				}
				a, err := ecg.Intake(ecg.RecordingInput{TakenAt: r.Taken, ReceivedAt: r.Received, Auto: r.Auto, Samples: w.Samples, RateHz: w.RateHz},
					ecg.IntakeOptions{Now: r.Received.Add(time.Hour), StudyZone: st.Loc})
				if err != nil {
					t.Fatalf("seed %d, %d participants, %s recording %d: intake refused it: %v", sz.seed, sz.participants, f.Case.StudyID, ri, err)
				}
				if a.DurationS != r.Seconds || a.TooShort != (r.Seconds < ecg.MinDiagnosticSeconds) {
					t.Errorf("seed %d, %d participants, %s recording %d: scripted %g s, intake measured %g s (too short %v)",
						sz.seed, sz.participants, f.Case.StudyID, ri, r.Seconds, a.DurationS, a.TooShort)
				}
				if !r.Noisy && a.Signal != nil && len(a.Signal.Beats) != len(r.RR)+1 {
					t.Errorf("seed %d, %d participants, %s recording %d: %d beats detected, %d scripted",
						sz.seed, sz.participants, f.Case.StudyID, ri, len(a.Signal.Beats), len(r.RR)+1)
				}
				n++
				if r.Seconds == ecg.MinDiagnosticSeconds {
					exact30++
				}
			}
		}
		t.Logf("seed %d, %d participants: %d recordings, %d of exactly 30 s", sz.seed, sz.participants, n, exact30)
		if n == 0 {
			t.Errorf("seed %d, %d participants: no recordings scripted", sz.seed, sz.participants)
		}
	}
}
