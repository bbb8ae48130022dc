package screen

import (
	"math"
	"math/rand/v2"
	"testing"

	"cohortdesk/cohort"
)

// Fixed, fictional week bounds for tests: a Monday midnight UTC in 2026 (the
// date matters to nothing; it only keeps times realistic).
const (
	testStart = int64(1_772_409_600_000)
	weekMs    = int64(7 * 24 * 3600 * 1000)
	minuteMs  = int64(60_000)
	hourMs    = 60 * minuteMs
	testNow   = testStart + 30*24*hourMs // well after the week
)

// rhythm selects the synthetic heart-rate pattern.
type rhythm int

const (
	// sinus: a slow daily swing, a slow random drift and 1 bpm (SD) of
	// reading noise, rounded to whole bpm, so successive readings seconds
	// apart differ by about 1 bpm (hand-worked: E|N(0, sqrt 2)| = 1.13).
	sinus rhythm = iota
	// afLike: each reading independent, uniform within +-25 bpm of 95, so
	// successive readings differ by about 17 bpm on average (hand-worked:
	// E|X-Y| for independent uniforms on 51 values is about 51/3).
	afLike
)

// synth describes a synthetic participant-week.
type synth struct {
	seed      uint64
	rhythm    rhythm
	cadenceMs int64   // mean time between readings; actual spacing is 0.5-1.5 times this
	wearHours float64 // readings only in the first wearHours of the week (0: whole week)
	walks     int     // number of 30-minute walks of 3000 steps each
}

// synthWeek makes a fictional participant-week of heart-rate readings and
// hourly step totals. It is deterministic for a given synth.
func synthWeek(tb testing.TB, s synth) cohort.Week {
	tb.Helper()
	if s.cadenceMs <= 0 {
		tb.Fatalf("synthWeek: cadence %d ms", s.cadenceMs)
	}
	rng := rand.New(rand.NewPCG(s.seed, uint64(s.rhythm)+1))
	w := cohort.Week{Week: 3, Start: testStart, End: testStart + weekMs}
	until := w.End
	if s.wearHours > 0 {
		until = w.Start + int64(s.wearHours*float64(hourMs))
	}
	n := int((until - w.Start) / s.cadenceMs)
	w.HR.T = make([]int64, 0, n+8)
	w.HR.V = make([]int32, 0, n+8)
	drift := 0.0
	for t := w.Start; t < until; t += s.cadenceMs/2 + rng.Int64N(s.cadenceMs+1) {
		var v float64
		switch s.rhythm {
		case sinus:
			drift += (rng.Float64() - 0.5) * 0.1
			drift = max(-5, min(5, drift))
			day := 8 * math.Sin(2*math.Pi*float64(t-w.Start)/float64(24*hourMs))
			v = 62 + day + drift + rng.NormFloat64()
		case afLike:
			v = 95 + float64(rng.IntN(51)-25)
		}
		w.HR.Append(t, int32(math.Round(v)))
	}
	for h := w.Start; h < w.End; h += hourMs {
		w.Steps.AppendInterval(h, h+hourMs, int32(rng.IntN(200)))
	}
	for range s.walks {
		at := w.Start + rng.Int64N(weekMs-hourMs)
		w.Steps.AppendInterval(at, at+30*minuteMs, 3000)
	}
	sortSteps(&w.Steps)
	return w
}

// sortSteps keeps step intervals in start order after walks are added (a
// simple insertion sort; step series are short).
func sortSteps(s *cohort.Samples) {
	for i := 1; i < len(s.T); i++ {
		for j := i; j > 0 && s.T[j] < s.T[j-1]; j-- {
			s.T[j], s.T[j-1] = s.T[j-1], s.T[j]
			s.V[j], s.V[j-1] = s.V[j-1], s.V[j]
			s.End[j], s.End[j-1] = s.End[j-1], s.End[j]
		}
	}
}

// fillWindows adds readings every stepMs to windows [from, to) of the given
// minutes, alternating base and base+masd within each window, so every such
// window has a MASD of exactly masd (hand-worked: every successive difference
// is masd).
func fillWindows(w *cohort.Week, minutes int, from, to int, base, masd int32, stepMs int64) {
	l := int64(minutes) * minuteMs
	for wi := from; wi < to; wi++ {
		ws := w.Start + int64(wi)*l
		k := int32(0)
		for t := ws; t < ws+l && t < w.End; t += stepMs {
			w.HR.Append(t, base+(k%2)*masd)
			k++
		}
	}
}

// emptyWeek is a week with no readings at the test bounds.
func emptyWeek() cohort.Week {
	return cohort.Week{Week: 3, Start: testStart, End: testStart + weekMs}
}

// oneRule is a protocol with a single 5-minute window size and no RR method,
// for tests whose hand-worked figures concern one window size. It computes
// under revision 0, whole usable windows as wear, the rule those figures
// were worked under; revision 1's covered time has tests of its own
// (TestCoveredWear and the ones after it).
func oneRule() Protocol {
	p := DefaultProtocol()
	p.Windows = p.Windows[:1]
	p.RR.Enabled = false
	p.Revision = 0
	return p
}
