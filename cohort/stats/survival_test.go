package stats

import (
	"encoding/binary"
	"fmt"
	"math"
	"testing"
)

// obsFrom builds observations from times, negative meaning censored at |t|
// (a compact stand-in for the "+" of printed tables).
func obsFrom(tb testing.TB, times ...float64) []Obs {
	tb.Helper()
	out := make([]Obs, len(times))
	for i, t := range times {
		out[i] = Obs{Time: math.Abs(t), Event: t > 0}
	}
	return out
}

func mustKM(tb testing.TB, obs []Obs) Curve {
	tb.Helper()
	c, err := KaplanMeier(obs, 0.95)
	if err != nil {
		tb.Fatal(err)
	}
	return c
}

// The 6-MP remission data (Freireich EJ et al. Blood 1963;21:699-716, as
// analysed by Gehan EA. Biometrika 1965;52:203-23), weeks in remission.
// Values from memory (widely reproduced textbook example); the hand-worked
// example below is the independent second check.
func TestKaplanMeierRemissionData(t *testing.T) {
	drug := mustKM(t, obsFrom(t, 6, 6, 6, -6, 7, -9, 10, -10, -11, 13, 16, -17, -19, -20, 22, 23, -25, -32, -32, -34, -35))
	tests := []struct {
		time float64
		s    float64 // from memory
		se   float64 // Greenwood SE, from memory (same tables), agrees with our hand computation
	}{
		{6, 0.857, 0.0764},
		{7, 0.807, 0.0869},
		{10, 0.753, 0.0963},
		{13, 0.690, 0.1068},
		{16, 0.627, 0.1141},
		{22, 0.538, 0.1282},
		{23, 0.448, 0.1346},
	}
	for _, tt := range tests {
		near(t, "S", drug.At(tt.time), tt.s, 0.0005)
		st := stepAt(t, drug, tt.time)
		near(t, "SE", st.SE, tt.se, 0.00005)
	}
	if drug.N != 21 || drug.Events != 9 {
		t.Errorf("N, events = %d, %d; want 21, 9", drug.N, drug.Events)
	}
	// At 10 there is one event and one censoring; 15 were at risk (21 minus
	// 4 at 6, 1 at 7, 1 at 9).
	if st := stepAt(t, drug, 10); st.AtRisk != 15 || st.Events != 1 || st.Censored != 1 {
		t.Errorf("step at 10 = %+v, want 15 at risk, 1 event, 1 censored", st)
	}
	m := drug.Median()
	if !m.Reached || m.Time != 23 {
		t.Errorf("6-MP median = %+v, want 23 (from memory)", m)
	}
	// Interval on the log(-log) band (computed by hand: the band's lower edge
	// is 0.5032 at 10 and 0.4316 at 13; its upper edge is still 0.6801 at 23,
	// the last event, so the upper bound is not reached).
	if !m.LoReached || m.Lo != 13 || m.HiReached || !math.IsNaN(m.Hi) {
		t.Errorf("6-MP median interval = %+v, want [13, not reached] (computed)", m)
	}
	near(t, "band lower at 10", stepAt(t, drug, 10).Lo, 0.5032, 0.00005)
	near(t, "band lower at 13", stepAt(t, drug, 13).Lo, 0.4316, 0.00005)
	near(t, "band upper at 23", stepAt(t, drug, 23).Hi, 0.6801, 0.00005)

	placebo := mustKM(t, obsFrom(t, 1, 1, 2, 2, 3, 4, 4, 5, 5, 8, 8, 8, 8, 11, 11, 12, 12, 15, 17, 22, 23))
	m = placebo.Median()
	if !m.Reached || m.Time != 8 {
		t.Errorf("placebo median = %+v, want 8 (from memory)", m)
	}
	// Computed by hand: lower edge 0.4254 at 4 (0.5 crossed), upper edge
	// 0.5777 at 8 and 0.4818 at 11.
	if m.Lo != 4 || m.Hi != 11 {
		t.Errorf("placebo median interval = %v-%v, want 4-11 (computed)", m.Lo, m.Hi)
	}
	near(t, "placebo S(5)", placebo.At(5), 12.0/21, 1e-12)
	last := placebo.Steps[len(placebo.Steps)-1]
	if last.Survival != 0 || !math.IsNaN(last.SE) || last.Lo != 0 || last.Hi != 0 {
		t.Errorf("placebo last step = %+v, want S 0, SE NaN, band 0-0", last)
	}
}

// Hand-worked example (computed by hand, independent of any table): times
// 1, 2+, 3, 3, 4+, 5 (6 subjects).
//
//	t=1: 6 at risk, 1 event:  S = 5/6
//	t=2: censored, S stays 5/6
//	t=3: 4 at risk, 2 events: S = 5/6 * 2/4 = 5/12; median 3 (first S <= 0.5)
//	t=4: censored
//	t=5: 1 at risk, 1 event:  S = 0
//
// Greenwood at 3: (5/12)^2 * (1/(6*5) + 2/(4*2)) = 425/8640, SE = 0.221785.
func TestKaplanMeierHandWorked(t *testing.T) {
	c := mustKM(t, obsFrom(t, 3, -2, 1, 5, 3, -4)) // unsorted on purpose
	want := []Step{
		{Time: 1, AtRisk: 6, Events: 1, Survival: 5.0 / 6},
		{Time: 2, AtRisk: 5, Censored: 1, Survival: 5.0 / 6},
		{Time: 3, AtRisk: 4, Events: 2, Survival: 5.0 / 12},
		{Time: 4, AtRisk: 2, Censored: 1, Survival: 5.0 / 12},
		{Time: 5, AtRisk: 1, Events: 1, Survival: 0},
	}
	if len(c.Steps) != len(want) {
		t.Fatalf("%d steps, want %d: %+v", len(c.Steps), len(want), c.Steps)
	}
	for i, w := range want {
		g := c.Steps[i]
		if g.Time != w.Time || g.AtRisk != w.AtRisk || g.Events != w.Events || g.Censored != w.Censored {
			t.Errorf("step %d = %+v, want %+v", i, g, w)
		}
		near(t, "S", g.Survival, w.Survival, 1e-15)
	}
	near(t, "SE at 3", c.Steps[2].SE, math.Sqrt(425.0/8640), 1e-12)
	near(t, "SE at 1", c.Steps[0].SE, 5.0/6*math.Sqrt(1.0/30), 1e-12)
	if m := c.Median(); m.Time != 3 {
		t.Errorf("median = %v, want 3", m.Time)
	}
	if s := c.At(0.5); s != 1 {
		t.Errorf("S before the first event = %v, want 1", s)
	}
}

// A subject censored at an event time was at risk for that event (events
// before censorings, the usual convention), and a curve sitting exactly at
// 0.5 gives the first time it gets there (our documented median convention).
func TestKaplanMeierTiesAndHalf(t *testing.T) {
	c := mustKM(t, obsFrom(t, 2, -2, 4, 6))
	if st := stepAt(t, c, 2); st.AtRisk != 4 {
		t.Errorf("at risk at 2 = %d, want 4", st.AtRisk)
	}
	near(t, "S(2)", c.At(2), 0.75, 1e-15)

	c = mustKM(t, obsFrom(t, 1, 2, 3, 4))
	if m := c.Median(); m.Time != 2 {
		t.Errorf("median with S(2) = 0.5 exactly = %v, want 2 (not the midpoint 2.5)", m.Time)
	}
}

// When the estimate reaches 0 the band is undefined there, so the median's
// interval stays open instead of closing on the last event. Three events
// at 1, 2, 3 (hand-worked): S = 2/3, 1/3, 0; the median is 2. The band at
// 1: Greenwood sum 1/6, ln S = -0.4055, w = 1.96 sqrt(1/6) / 0.4055 =
// 1.9733; lower edge (2/3)^exp(1.9733) = 0.0541, upper 0.9452, so the lower
// bound is 1. At 2: sum 1/6 + 1/2 = 2/3, w = 1.4567, upper edge
// (1/3)^exp(-1.4567) = 0.7741; the upper edge never gets to 0.5 while
// S > 0, and at 3 (S = 0) there is no band: not reached.
// Before this rule both bounds read 3 from the zero step's band of 0-0, an
// interval [3, 3] that excluded the median itself. The survival package of
// R gives NA for such a limit (from memory, not run here).
func TestKaplanMeierMedianIntervalOpenAtZero(t *testing.T) {
	c := mustKM(t, obsFrom(t, 1, 2, 3))
	m := c.Median()
	if !m.Reached || m.Time != 2 {
		t.Fatalf("median = %+v, want 2", m)
	}
	if !m.LoReached || m.Lo != 1 {
		t.Errorf("lower bound = %+v, want 1 (computed)", m)
	}
	near(t, "band lower at 1", stepAt(t, c, 1).Lo, 0.0541, 0.00005)
	if m.HiReached || !math.IsNaN(m.Hi) {
		t.Errorf("upper bound = %v (reached %v), want not reached", m.Hi, m.HiReached)
	}
	near(t, "band upper at 2", stepAt(t, c, 2).Hi, 0.7741, 0.00005)

	// All subjects have the event at one time: S drops from 1 to 0, the
	// median is that time, and neither bound exists (hand-worked).
	c = mustKM(t, obsFrom(t, 4, 4))
	m = c.Median()
	if !m.Reached || m.Time != 4 || m.LoReached || m.HiReached {
		t.Errorf("all at once: median %+v, want 4 with both bounds not reached", m)
	}
}

func TestKaplanMeierEmptyAndInvalid(t *testing.T) {
	c := mustKM(t, nil)
	if m := c.Median(); m.Reached || c.At(10) != 1 {
		t.Errorf("empty curve: median %+v, S(10) %v; want not reached, 1", m, c.At(10))
	}
	c = mustKM(t, obsFrom(t, -5, -6))
	if m := c.Median(); m.Reached {
		t.Errorf("all censored: median %+v, want not reached", m)
	}
	for _, bad := range []float64{-1, math.NaN(), math.Inf(1)} {
		_, err := KaplanMeier([]Obs{{Time: 1, Event: true}, {Time: bad, Event: true}}, 0.95)
		wantInvalid(t, "bad time", err)
	}
	_, err := KaplanMeier(nil, 0)
	wantInvalid(t, "conf 0", err)
}

func stepAt(tb testing.TB, c Curve, t float64) Step {
	tb.Helper()
	for _, s := range c.Steps {
		if s.Time == t {
			return s
		}
	}
	tb.Fatalf("no step at %v", t)
	return Step{}
}

// FuzzKaplanMeier checks invariants on arbitrary inputs: survival starts at
// or below 1, never rises, stays in [0, 1]; the band holds the estimate; the
// counts add up.
func FuzzKaplanMeier(f *testing.F) {
	f.Add([]byte{6, 6, 6, 0x86, 7, 0x89, 10})
	f.Add([]byte{1, 1, 1, 1})
	f.Add([]byte{0x81, 0x82})
	f.Fuzz(func(t *testing.T, data []byte) {
		var obs []Obs
		for i := 0; i+1 < len(data); i += 2 {
			v := binary.LittleEndian.Uint16(data[i:])
			obs = append(obs, Obs{Time: float64(v & 0x7fff), Event: v&0x8000 == 0})
		}
		c, err := KaplanMeier(obs, 0.95)
		if err != nil {
			t.Fatal(err)
		}
		prev, seen := 1.0, 0
		for _, s := range c.Steps {
			if s.Survival > prev || s.Survival < 0 || s.Survival > 1 {
				t.Fatalf("survival %v after %v", s.Survival, prev)
			}
			if !(s.Lo <= s.Survival+1e-12 && s.Survival <= s.Hi+1e-12) {
				t.Fatalf("band %v-%v does not hold %v", s.Lo, s.Hi, s.Survival)
			}
			if s.AtRisk != len(obs)-seen {
				t.Fatalf("at risk %d, want %d", s.AtRisk, len(obs)-seen)
			}
			seen += s.Events + s.Censored
			prev = s.Survival
		}
		if seen != len(obs) {
			t.Fatalf("steps account for %d of %d subjects", seen, len(obs))
		}
	})
}

// go test -bench KaplanMeier ./cohort/stats
func BenchmarkKaplanMeier(b *testing.B) {
	obs := make([]Obs, 10000)
	for i := range obs {
		obs[i] = Obs{Time: float64((i * 7919) % 365), Event: i%3 != 0}
	}
	for b.Loop() {
		_, _ = KaplanMeier(obs, 0.95)
	}
}

// TestKaplanMeierTalliesIsKaplanMeier: the curve from tallies (how storage
// keeps observations: counts per time) is the curve from the observations
// they count, whatever the order and splitting of the tallies; checked on
// the remission data above and on random data with many ties.
func TestKaplanMeierTalliesIsKaplanMeier(t *testing.T) {
	tally := func(obs []Obs, split int) []Tally {
		var out []Tally
		for i, o := range obs {
			tl := Tally{Time: o.Time}
			if o.Event {
				tl.Events = 1
			} else {
				tl.Censored = 1
			}
			// Merge into an earlier tally of the same time only sometimes,
			// so several tallies share times.
			if split > 0 && i%split == 0 {
				for j := range out {
					if out[j].Time == o.Time {
						out[j].Events += tl.Events
						out[j].Censored += tl.Censored
						tl = Tally{}
						break
					}
				}
			}
			if tl.Events+tl.Censored > 0 {
				out = append(out, tl)
			}
		}
		// Reverse, so the order differs from the observations'.
		for i, j := 0, len(out)-1; i < j; i, j = i+1, j-1 {
			out[i], out[j] = out[j], out[i]
		}
		return append(out, Tally{Time: 3}) // an empty tally changes nothing
	}
	// The 6-MP drug arm of TestKaplanMeierRemissionData.
	sets := [][]Obs{obsFrom(t, 6, 6, 6, -6, 7, -9, 10, -10, -11, 13, 16, -17, -19, -20, 22, 23, -25, -32, -32, -34, -35)}
	seed := uint64(7)
	for range 5 {
		var obs []Obs
		for range 200 {
			seed = seed*6364136223846793005 + 1442695040888963407
			obs = append(obs, Obs{Time: float64(seed >> 60), Event: seed>>59&1 == 1})
		}
		sets = append(sets, obs)
	}
	for i, obs := range sets {
		want, err := KaplanMeier(obs, 0.95)
		if err != nil {
			t.Fatal(err)
		}
		for _, split := range []int{0, 2, 3} {
			got, err := KaplanMeierTallies(tally(obs, split), 0.95)
			if err != nil {
				t.Fatal(err)
			}
			if fmt.Sprint(got) != fmt.Sprint(want) {
				t.Errorf("set %d, split %d: tallies give\n%v\nobservations give\n%v", i, split, got, want)
			}
		}
	}
	if _, err := KaplanMeierTallies([]Tally{{Time: 1, Events: -1}}, 0.95); err == nil {
		t.Error("a negative count was accepted")
	}
}
