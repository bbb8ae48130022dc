package demo

import (
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"math"
	"slices"
	"sync"
	"testing"
	"time"

	"cohortdesk/cohort"
)

// weekStats is what one pass over the default study's wear data measures.
type weekStats struct {
	readings, hr, steps, rr int
	weeks, emptyWeeks       int
	denseGaps, restGaps     int // successive heart-rate gaps of at most 6 s, and of 3-10 min
	rrParticipants          int // participants with any beat intervals
	rrRuns                  []int
	afWeeks, plainWeeks     []weekMeasure
}

// weekMeasure is the successive-difference picture of one week.
type weekMeasure struct {
	id        string
	masdIn    float64 // mean |successive difference| of rest readings inside AF episodes
	nIn       int
	masdOut   float64 // the same outside any episode
	nOut      int
	bestRun   int // longest run of consecutive irregular 30-minute windows
	hoursInAF float64
}

// restPair says whether two successive heart-rate readings are both rest
// readings close enough to compare: exercise readings come seconds apart and
// are left out, as gaps over 15 minutes are.
func restPair(dt int64) bool { return dt >= 30*second && dt <= 15*minute }

// measureWeek computes, directly from the readings, the mean absolute
// successive difference of heart rate inside and outside AF episodes and the
// longest run of 30-minute windows whose MASD is at least 8 bpm (windows need
// at least 4 rest readings). The window size and the 8 bpm mark are
// illustrative choices for this test, not the screen's defaults.
func measureWeek(w *cohort.Week, af []span) weekMeasure {
	var m weekMeasure
	in := func(t int64) bool {
		for _, e := range af {
			if e.a <= t && t < e.b {
				return true
			}
		}
		return false
	}
	var sumIn, sumOut float64
	for i := 1; i < w.HR.Len(); i++ {
		dt := w.HR.T[i] - w.HR.T[i-1]
		if !restPair(dt) {
			continue
		}
		d := math.Abs(float64(w.HR.V[i] - w.HR.V[i-1]))
		switch a, b := in(w.HR.T[i-1]), in(w.HR.T[i]); {
		case a && b:
			sumIn += d
			m.nIn++
		case !a && !b:
			sumOut += d
			m.nOut++
		}
	}
	if m.nIn > 0 {
		m.masdIn = sumIn / float64(m.nIn)
	}
	if m.nOut > 0 {
		m.masdOut = sumOut / float64(m.nOut)
	}
	const win = 30 * minute
	run, i := 0, 0
	for ws := w.Start; ws < w.End; ws += win {
		var sum float64
		n := 0
		for ; i < w.HR.Len() && w.HR.T[i] < ws+win; i++ {
			if i > 0 && w.HR.T[i-1] >= ws && restPair(w.HR.T[i]-w.HR.T[i-1]) {
				sum += math.Abs(float64(w.HR.V[i] - w.HR.V[i-1]))
				n++
			}
		}
		if n >= 3 && sum/float64(n) >= 8 {
			run++
			m.bestRun = max(m.bestRun, run)
		} else {
			run = 0
		}
	}
	for _, e := range af {
		m.hoursInAF += float64(max(0, min(e.b, w.End)-max(e.a, w.Start))) / float64(hour)
	}
	return m
}

// defaultPass walks every reading of the default study once and checks the
// invariants every week must meet; the tests below read the figures.
var defaultPass = sync.OnceValue(func() *passResult {
	s, err := defaultStudy()
	if err != nil {
		return &passResult{err: err.Error()}
	}
	res := &passResult{}
	fail := func(format string, args ...any) {
		if len(res.problems) < 20 {
			res.problems = append(res.problems, fmt.Sprintf(format, args...))
		}
	}
	st := &res.stats
	today := s.Today.UnixMilli()
	for _, p := range s.Participants {
		tr := s.Truth(p)
		var af, any []span
		for _, e := range tr.Episodes {
			x := span{e.Start.UnixMilli(), e.End.UnixMilli()}
			any = append(any, x)
			if e.Kind == EpisodeAF {
				af = append(af, x)
			}
		}
		var silent []span
		for _, q := range tr.Silent {
			silent = append(silent, span{q.Start.UnixMilli(), q.End.UnixMilli()})
		}
		limit := int64(math.MaxInt64)
		if !p.Withdrawn.IsZero() {
			limit = p.Withdrawn.In(p.Loc).UnixMilli()
		}
		n, hasRR := 0, false
		for w := range s.Weeks(p) {
			if w.Week != n {
				fail("%s: week %d yielded as number %d", p.StudyID, n, w.Week)
			}
			ws, we := cohort.WeekBounds(p.Enrolled, p.Loc, n)
			if w.Start != ws.UnixMilli() || w.End != we.UnixMilli() {
				fail("%s week %d: bounds %d-%d, want %d-%d", p.StudyID, n, w.Start, w.End, ws.UnixMilli(), we.UnixMilli())
			}
			if w.End > today {
				fail("%s week %d ends after today", p.StudyID, n)
			}
			for _, ser := range []struct {
				name   string
				s      *cohort.Samples
				lo, hi int32
			}{{"heart rate", &w.HR, 30, 220}, {"steps", &w.Steps, 1, 5000}, {"rr", &w.RR, 280, 2000}} {
				if !ser.s.Sorted() {
					fail("%s week %d: %s not sorted", p.StudyID, n, ser.name)
				}
				for i, t := range ser.s.T {
					if t < w.Start || t >= w.End || t >= limit {
						fail("%s week %d: %s reading at %d outside [%d, %d) or after withdrawal", p.StudyID, n, ser.name, t, w.Start, w.End)
					}
					if v := ser.s.V[i]; v < ser.lo || v > ser.hi {
						fail("%s week %d: %s value %d", p.StudyID, n, ser.name, v)
					}
					if overlaps(silent, t, t+1) {
						fail("%s week %d: %s reading inside a silence", p.StudyID, n, ser.name)
					}
				}
			}
			if len(w.Steps.End) != w.Steps.Len() {
				fail("%s week %d: %d step ends for %d steps", p.StudyID, n, len(w.Steps.End), w.Steps.Len())
			}
			for i := range w.Steps.End {
				if e := w.Steps.End[i]; e <= w.Steps.T[i] || e > w.End || (i > 0 && w.Steps.T[i] < w.Steps.End[i-1]) {
					fail("%s week %d: step interval %d-%d", p.StudyID, n, w.Steps.T[i], e)
				}
			}
			if w.RR.End != nil || w.HR.End != nil {
				fail("%s week %d: end times on a point series", p.StudyID, n)
			}
			if w.RR.Len() > 0 {
				hasRR = true
				if !p.HasRR {
					fail("%s: beat intervals from a watch without them", p.StudyID)
				}
				runLen := 1
				for i := 1; i < w.RR.Len(); i++ {
					if w.RR.T[i]-w.RR.T[i-1] == int64(w.RR.V[i]) {
						runLen++
						continue
					}
					st.rrRuns = append(st.rrRuns, runLen)
					runLen = 1
				}
				st.rrRuns = append(st.rrRuns, runLen)
			}
			for i := 1; i < w.HR.Len(); i++ {
				switch dt := w.HR.T[i] - w.HR.T[i-1]; {
				case dt <= 6*second:
					st.denseGaps++
				case dt >= 3*minute && dt <= 10*minute+2*minute:
					st.restGaps++
				}
			}
			st.readings += Readings(&w)
			st.hr += w.HR.Len()
			st.steps += w.Steps.Len()
			st.rr += w.RR.Len()
			st.weeks++
			if Readings(&w) == 0 {
				st.emptyWeeks++
			}
			m := measureWeek(&w, af)
			m.id = p.StudyID
			switch {
			case m.hoursInAF >= 6:
				st.afWeeks = append(st.afWeeks, m)
			case len(any) == 0 && Readings(&w) > 0:
				st.plainWeeks = append(st.plainWeeks, m)
			}
			n++
		}
		if n != s.WeekCount(p) {
			fail("%s: %d weeks yielded, WeekCount %d", p.StudyID, n, s.WeekCount(p))
		}
		if hasRR {
			st.rrParticipants++
		}
	}
	return res
})

type passResult struct {
	err      string
	problems []string
	stats    weekStats
}

func mustPass(tb testing.TB) *weekStats {
	tb.Helper()
	r := defaultPass()
	if r.err != "" {
		tb.Fatal(r.err)
	}
	return &r.stats
}

func TestWeeksSortedInBoundsAndPlausible(t *testing.T) {
	r := defaultPass()
	if r.err != "" {
		t.Fatal(r.err)
	}
	for _, p := range r.problems {
		t.Error(p)
	}
}

func TestReadingVolume(t *testing.T) {
	st := mustPass(t)
	// Target: 10 to 15 million readings in the default study, so the demo
	// loads quickly but is not trivial.
	if st.readings < 10_000_000 || st.readings > 15_000_000 {
		t.Errorf("%d readings, want 10-15 million", st.readings)
	}
	if st.hr == 0 || st.steps == 0 || st.rr == 0 {
		t.Errorf("readings by kind: heart rate %d, steps %d, rr %d", st.hr, st.steps, st.rr)
	}
	if st.emptyWeeks == 0 {
		t.Error("no empty weeks: silences and stopped wearers should leave some")
	}
	t.Logf("%d readings in %d weeks: heart rate %d, steps %d, rr %d", st.readings, st.weeks, st.hr, st.steps, st.rr)
}

func TestSamplingIsIrregular(t *testing.T) {
	st := mustPass(t)
	if st.denseGaps < 100_000 || st.restGaps < 100_000 {
		t.Errorf("heart-rate gaps of at most 6 s: %d; of 3-12 min: %d; want many of both", st.denseGaps, st.restGaps)
	}
}

func TestTachograms(t *testing.T) {
	st := mustPass(t)
	if st.rrParticipants == 0 {
		t.Fatal("no participant has beat intervals")
	}
	for _, n := range st.rrRuns {
		if n < 130 || n > 200 {
			t.Errorf("tachogram of %d beats, want 130-200", n)
			break
		}
	}
}

func TestAFWeeksHaveLargerSuccessiveDifferences(t *testing.T) {
	st := mustPass(t)
	if len(st.afWeeks) < 10 || len(st.plainWeeks) < 1000 {
		t.Fatalf("%d AF weeks and %d plain weeks; too few to compare", len(st.afWeeks), len(st.plainWeeks))
	}
	var in, out []float64
	runs := 0
	for _, m := range st.afWeeks {
		if m.nIn >= 20 {
			in = append(in, m.masdIn)
		}
		if m.bestRun >= 3 {
			runs++
		}
	}
	plainRuns := 0
	for _, m := range st.plainWeeks {
		out = append(out, m.masdOut)
		if m.bestRun >= 3 {
			plainRuns++
		}
	}
	slices.Sort(in)
	slices.Sort(out)
	medIn, medOut, p99Out := in[len(in)/2], out[len(out)/2], out[len(out)*99/100]
	t.Logf("MASD inside AF: median %.1f bpm over %d weeks; weeks without episodes: median %.1f, 99th centile %.1f over %d weeks",
		medIn, len(in), medOut, p99Out, len(out))
	t.Logf("runs of 3+ irregular 30-min windows: %d of %d AF weeks, %d of %d plain weeks", runs, len(st.afWeeks), plainRuns, len(st.plainWeeks))
	if medIn < 3*medOut || in[0] < p99Out {
		t.Errorf("AF readings are not clearly more irregular: median %.1f vs %.1f, smallest AF %.1f vs 99th centile %.1f", medIn, medOut, in[0], p99Out)
	}
	if float64(runs) < 0.9*float64(len(st.afWeeks)) {
		t.Errorf("only %d of %d AF weeks have a run of irregular windows", runs, len(st.afWeeks))
	}
	if float64(plainRuns) > 0.02*float64(len(st.plainWeeks)) {
		t.Errorf("%d of %d weeks without episodes have a run of irregular windows", plainRuns, len(st.plainWeeks))
	}
}

// csvDigest hashes the readings CSV of the first few participants' weeks.
func csvDigest(tb testing.TB, s *Study, ids []string) string {
	tb.Helper()
	h := sha256.New()
	w := NewCSVWriter(h)
	for _, id := range ids {
		p, ok := s.Participant(id)
		if !ok {
			tb.Fatalf("participant %s missing", id)
		}
		for wk := range s.Weeks(p) {
			if err := w.WriteWeek(p, wk); err != nil {
				tb.Fatal(err)
			}
		}
	}
	if err := w.Flush(); err != nil {
		tb.Fatal(err)
	}
	return hex.EncodeToString(h.Sum(nil))
}

func TestSameSeedSameOutput(t *testing.T) {
	a := mustStudy(t, Config{Seed: 42, Participants: 80})
	b := mustStudy(t, Config{Seed: 42, Participants: 80})
	c := mustStudy(t, Config{Seed: 43, Participants: 80})
	var ids []string
	for _, p := range a.Participants {
		if a.WeekCount(p) > 0 && len(ids) < 4 {
			ids = append(ids, p.StudyID)
		}
	}
	for _, p := range a.Participants {
		if a.Truth(p).HasAF() {
			ids = append(ids, p.StudyID)
			break
		}
	}
	da, db := csvDigest(t, a, ids), csvDigest(t, b, ids)
	if da != db {
		t.Errorf("same seed, different CSV digests %s and %s", da, db)
	}
	if dc := csvDigest(t, c, ids[:1]); dc == csvDigest(t, a, ids[:1]) {
		t.Error("different seeds gave the same CSV")
	}
	if !slices.EqualFunc(a.Participants, b.Participants, func(x, y Participant) bool {
		return x.StudyID == y.StudyID && x.GivenName == y.GivenName && x.BirthDate == y.BirthDate && x.Withdrawn == y.Withdrawn
	}) {
		t.Error("same seed, different participants")
	}
	fa, fb := a.PlanFollowUps(a.ExpectedCases()), b.PlanFollowUps(b.ExpectedCases())
	if len(fa) != len(fb) {
		t.Fatalf("same seed, %d and %d cases", len(fa), len(fb))
	}
	for i := range fa {
		if fa[i].Final != fb[i].Final || len(fa[i].Transitions) != len(fb[i].Transitions) || len(fa[i].Recordings) != len(fb[i].Recordings) {
			t.Errorf("case %d differs between runs with the same seed", i)
		}
	}
}

func TestWeekAloneEqualsWeekInSequence(t *testing.T) {
	s := mustDefault(t)
	p := s.Participants[0]
	var seq []cohort.Week
	for w := range s.Weeks(p) {
		seq = append(seq, w)
	}
	for _, n := range []int{len(seq) - 1, 3, 0} {
		w, ok := s.Week(p, n)
		if !ok {
			t.Fatalf("Week(%d) missing", n)
		}
		if !slices.Equal(w.HR.T, seq[n].HR.T) || !slices.Equal(w.HR.V, seq[n].HR.V) || !slices.Equal(w.RR.V, seq[n].RR.V) || !slices.Equal(w.Steps.End, seq[n].Steps.End) {
			t.Errorf("week %d generated alone differs from week %d in sequence", n, n)
		}
	}
	if _, ok := s.Week(p, len(seq)); ok {
		t.Errorf("Week(%d) exists beyond WeekCount", len(seq))
	}
	if _, ok := s.Week(Participant{StudyID: "QRW-9999-A"}, 0); ok {
		t.Error("Week of an unknown participant exists")
	}
}

func TestLateEnroleesAndWithdrawalsHaveFewerWeeks(t *testing.T) {
	s := mustDefault(t)
	today := cohort.DateOf(s.Today.In(s.Loc))
	full, short, withdrawn := 0, 0, 0
	for _, p := range s.Participants {
		n := s.WeekCount(p)
		avail := min(WearWeeks, today.DaysSince(p.Enrolled)/7)
		switch {
		case !p.Withdrawn.IsZero():
			withdrawn++
			if p.WithdrawalReason == "" {
				t.Errorf("%s withdrawn without a reason", p.StudyID)
			}
			if n > avail || n > (p.Withdrawn.DaysSince(p.Enrolled)+6)/7 {
				t.Errorf("%s: %d weeks though withdrawn %s after enrolling %s", p.StudyID, n, p.Withdrawn, p.Enrolled)
			}
		case n != avail:
			t.Errorf("%s: %d weeks, want %d (enrolled %s)", p.StudyID, n, avail, p.Enrolled)
		case n == WearWeeks:
			full++
		default:
			short++
		}
	}
	if full == 0 || short == 0 || withdrawn == 0 {
		t.Errorf("full %d, short %d, withdrawn %d: want each", full, short, withdrawn)
	}
}

func TestSilencesLastTwoWeeks(t *testing.T) {
	s := mustDefault(t)
	n := 0
	for _, p := range s.Participants {
		for _, q := range s.Truth(p).Silent {
			if q.End.Sub(q.Start) >= 14*24*time.Hour {
				n++
			}
		}
	}
	if n == 0 {
		t.Error("nobody goes silent for 14 days or more")
	}
}

func TestDecayMatchesExp(t *testing.T) {
	// Reference: math.Exp and math.Sqrt directly.
	for x := 1e-6; x < 0.05; x *= 1.1 {
		phi, keep := decay(x)
		wantPhi, wantKeep := math.Exp(-x), math.Sqrt(-math.Expm1(-2*x))
		if math.Abs(phi-wantPhi) > 1e-9 || math.Abs(keep-wantKeep) > 1e-6*wantKeep {
			t.Errorf("decay(%g) = %g, %g; want %g, %g", x, phi, keep, wantPhi, wantKeep)
		}
	}
}
