package demo

import (
	"slices"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/followup"
	"cohortdesk/cohort/overread"
)

// allowedMoves is the move table documented at the top of followup.go,
// written out again here so the script is checked against the documentation
// rather than itself.
var allowedMoves = map[followup.State][]followup.State{
	followup.Open:              {followup.Contacting, followup.Reached, followup.ClosedWithdrawn},
	followup.Contacting:        {followup.Reached, followup.ClosedUnreachable, followup.ClosedWithdrawn},
	followup.Reached:           {followup.RecorderSent, followup.ClosedDeclined, followup.ClosedWithdrawn},
	followup.RecorderSent:      {followup.RecordingReceived, followup.ClosedWithdrawn},
	followup.RecordingReceived: {followup.OverRead, followup.RecorderSent, followup.ClosedWithdrawn},
	followup.OverRead:          {followup.Referred, followup.ClosedNotConfirmed, followup.ClosedWithdrawn},
}

// The script's moves are a subset of the app's state table, so the loader can
// enter every one of them through the case actions.
func TestScriptMovesAreAllowedByTheStateTable(t *testing.T) {
	for from, tos := range allowedMoves {
		for _, to := range tos {
			if !followup.CanMove(from, to) {
				t.Errorf("the script moves %s -> %s, which followup's state table refuses", from, to)
			}
		}
	}
}

func TestEveryStateReachedInDefaultSizeStudy(t *testing.T) {
	for _, seed := range []uint64{0, 1, 2, 17} {
		s := mustStudy(t, Config{Seed: seed})
		fs := s.PlanFollowUps(s.ExpectedCases())
		got := map[followup.State]int{}
		for _, f := range fs {
			got[f.Final]++
		}
		for _, st := range followup.States() {
			if got[st] == 0 {
				t.Errorf("seed %d: no case ends in state %s (counts %v)", seed, st, got)
			}
		}
		t.Logf("seed %d: %d cases: %v", seed, len(fs), got)
	}
}

func TestFollowUpScriptsAreConsistent(t *testing.T) {
	s := mustDefault(t)
	cases := s.ExpectedCases()
	fs := s.PlanFollowUps(cases)
	if len(fs) != len(cases) {
		t.Fatalf("%d scripts for %d cases", len(fs), len(cases))
	}
	inv, _ := s.User(cohort.Investigator)
	canaryReferred, short, disagree := false, 0, 0
	for i, f := range fs {
		c := cases[i]
		if f.Case != c {
			t.Errorf("script %d is for case %+v, want %+v", i, f.Case, c)
		}
		p, _ := s.Participant(c.StudyID)
		state, last := followup.Open, c.Opened
		for _, tr := range f.Transitions {
			if tr.From != state {
				t.Errorf("%s: move from %s while in %s", c.StudyID, tr.From, state)
			}
			if !slices.Contains(allowedMoves[tr.From], tr.To) {
				t.Errorf("%s: illegal move %s -> %s", c.StudyID, tr.From, tr.To)
			}
			if tr.At.Before(last) || tr.At.After(s.Today) {
				t.Errorf("%s: move to %s at %v, out of order or after today", c.StudyID, tr.To, tr.At)
			}
			if tr.By == "" {
				t.Errorf("%s: move to %s by nobody", c.StudyID, tr.To)
			}
			state, last = tr.To, tr.At
		}
		if state != f.Final {
			t.Errorf("%s: transitions end in %s, final %s", c.StudyID, state, f.Final)
		}
		for _, a := range f.Attempts {
			if a.At.Before(c.Opened) || a.At.After(s.Today) || a.By != f.Owner || a.Note == "" {
				t.Errorf("%s: attempt %+v", c.StudyID, a)
			}
			for _, v := range s.Canaries() {
				if strings.Contains(a.Note, v) {
					t.Errorf("%s: note %q carries canary %q", c.StudyID, a.Note, v)
				}
			}
			if strings.Contains(a.Note, p.GivenName) || strings.Contains(a.Note, p.FamilyName) {
				t.Errorf("%s: note %q names the participant", c.StudyID, a.Note)
			}
		}
		var lastRead overread.Rhythm
		for _, rec := range f.Recordings {
			sum := rec.FirstBeat
			for _, rr := range rec.RR {
				if rr < 0.2 || rr > 2 {
					t.Errorf("%s: RR interval %.3f s", c.StudyID, rr)
				}
				sum += rr
			}
			if sum > rec.Seconds+1e-9 || len(rec.RR) < 5 {
				t.Errorf("%s: %d beats spanning %.2f s in a %.0f s recording", c.StudyID, len(rec.RR), sum, rec.Seconds)
			}
			if rec.Seconds < 30 {
				short++
			}
			if !rec.Received.After(rec.Taken) || rec.Taken.Before(c.Opened) || rec.Received.After(s.Today) {
				t.Errorf("%s: recording taken %v received %v", c.StudyID, rec.Taken, rec.Received)
			}
			if (rec.OverRead == "") != rec.ReadAt.IsZero() || (rec.OverRead != "" && rec.Reader != inv.Login) {
				t.Errorf("%s: over-read %q at %v by %q", c.StudyID, rec.OverRead, rec.ReadAt, rec.Reader)
			}
			if rec.OverRead != "" {
				lastRead = rec.OverRead
				if (rec.Auto == overread.AutoSuggestsAF) != (rec.OverRead == overread.AF) {
					disagree++
				}
			}
		}
		switch f.Final {
		case followup.Referred:
			// Only a confirmed AF is referred: its summary is signed off.
			if lastRead != overread.AF {
				t.Errorf("%s: referred after over-read %q", c.StudyID, lastRead)
			}
			if p.Canary {
				canaryReferred = true
			}
		case followup.ClosedNotConfirmed:
			if lastRead == overread.AF || lastRead == "" {
				t.Errorf("%s: not confirmed after over-read %q", c.StudyID, lastRead)
			}
		case followup.ClosedWithdrawn:
			if p.Withdrawn.IsZero() {
				t.Errorf("%s: closed withdrawn but never withdrew", c.StudyID)
			}
		}
	}
	if !canaryReferred {
		t.Error("no canary participant is referred, so no referral summary can be checked for canaries")
	}
	if short == 0 {
		t.Error("no recording under 30 s")
	}
	if disagree == 0 {
		t.Error("the recorder's interpretation never disagrees with the over-read")
	}
}

func TestRecordingRhythmsLookTheirPart(t *testing.T) {
	// Successive-difference irregularity of the RR series: AF must be far more
	// irregular than sinus rhythm (normalised RMSSD; AF-like above 0.1 per Dash
	// et al. 2009, from memory, see check-values.md).
	r := newRand(1, 99, 0, 0)
	nrmssd := func(rr []float64) float64 {
		var sum, sq float64
		for i, x := range rr {
			sum += x
			if i > 0 {
				sq += (x - rr[i-1]) * (x - rr[i-1])
			}
		}
		return (sq / float64(len(rr)-1)) / (sum / float64(len(rr)) * sum / float64(len(rr)))
	}
	for range 20 {
		_, af := recordingRR(r, overread.AF, 60)
		_, sinus := recordingRR(r, overread.Sinus, 60)
		a, b := nrmssd(af), nrmssd(sinus)
		// nrmssd above returns the square of normalised RMSSD.
		if a < 0.1*0.1 || b > 0.1*0.1 {
			t.Errorf("normalised RMSSD squared: AF %.4f, sinus %.4f", a, b)
		}
	}
}

func TestUnknownCaseStaysOpen(t *testing.T) {
	s := mustDefault(t)
	fs := s.PlanFollowUps([]CaseInput{{StudyID: "QRW-9999-A", Opened: s.Today}})
	if len(fs) != 1 || fs[0].Final != followup.Open || len(fs[0].Transitions) != 0 {
		t.Errorf("unknown participant's case: %+v", fs)
	}
}

func TestWorkTimeSkipsWeekendsAndClosures(t *testing.T) {
	s := mustDefault(t)
	r := newRand(3, 3, 3, 3)
	for _, c := range s.Closures {
		start := c.Date.AddDays(-1).In(s.Loc).Add(17 * time.Hour)
		for range 20 {
			got := s.workTime(r, start, 0, 2)
			d := got.In(s.Loc)
			if !got.After(start) || !s.workingDay(cohort.DateOf(d)) || d.Hour() < 8 || d.Hour() >= 17 {
				t.Errorf("workTime after %v gave %v", start, d)
			}
		}
	}
}
