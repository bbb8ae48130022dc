package rr

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"cohortdesk/cohort"
)

func near(got, want, tol float64) bool { return math.Abs(got-want) <= tol }

func TestRMSSD(t *testing.T) {
	tests := []struct {
		name string
		rr   []float64
		want float64
	}{
		// computed, check-values.md (Task Force ESC/NASPE 1996 definition):
		// RR 800, 810, 790, 820, 800 ms gives RMSSD 21.2132 ms.
		{"task force hand-worked", []float64{800, 810, 790, 820, 800}, 21.2132},
		// hand-worked: one difference of 30 ms, root of its square is 30.
		{"two beats", []float64{800, 830}, 30},
		// hand-worked: constant series has no successive change.
		{"constant", []float64{700, 700, 700}, 0},
		// hand-worked: no difference exists, documented as 0.
		{"single", []float64{800}, 0},
		{"empty", nil, 0},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			if got := RMSSD(tc.rr); !near(got, tc.want, 5e-5) {
				t.Errorf("RMSSD(%v) = %.6f, want %.4f", tc.rr, got, tc.want)
			}
		})
	}
}

func TestNormalisedRMSSD(t *testing.T) {
	rr := []float64{800, 810, 790, 820, 800}
	// computed, check-values.md: RMSSD 21.2132 ms; mean RR 4020/5 = 804 ms
	// (hand-worked), so normalised RMSSD = 21.2132/804 = 0.0263846.
	want := 21.2132 / 804.0
	if got := NormalisedRMSSD(rr); !near(got, want, 1e-6) {
		t.Errorf("NormalisedRMSSD = %.7f, want %.7f", got, want)
	}
	// hand-worked: a non-positive mean has no meaningful ratio, documented as 0.
	if got := NormalisedRMSSD([]float64{0, 0}); got != 0 {
		t.Errorf("NormalisedRMSSD(zeros) = %v, want 0", got)
	}
}

// shannonEntropy is entropy with its own scratch space and the guards
// Params.Validate gives Analyse: 0 when bins < 2 or nothing is left after
// trimming, binned exactly (the current rule). The input is not modified.
func shannonEntropy(rr []float64, bins, trim int) float64 {
	return shannonEntropyRule(rr, bins, trim, true)
}

func shannonEntropyRule(rr []float64, bins, trim int, exact bool) float64 {
	if bins < 2 || trim < 0 || len(rr)-2*trim < 1 {
		return 0
	}
	return entropy(rr, bins, trim, make([]float64, len(rr)), make([]int, bins), exact)
}

// A whole-millisecond value on an interior bin edge goes to the upper bin,
// as a standard histogram puts it (numpy.histogram's half-open bins [a, b),
// the last one closed; from memory). 600..698 ms in 16 bins has edges every
// 6.125 ms: edge 8 is 600 + 8 x 98/16 = 649 exactly (hand-worked), so 649
// opens bin 8 and 648 (bin 7.84) stays in bin 7. In floating point 16/98 x
// 49 comes out just under 8 and 649 falls into bin 7.
func TestEntropyExactBinsOnEdges(t *testing.T) {
	series := []float64{600, 648, 649, 698}
	// Exact: one value in each of bins 0, 7, 8, 15: ln 4 / ln 16 = 0.5.
	if got := shannonEntropy(series, 16, 0); !near(got, 0.5, 1e-12) {
		t.Errorf("exact entropy = %.10f, want 0.5 (649 in bin 8)", got)
	}
	// The first rule (floating-point edges), kept for results stored under
	// it: 648 and 649 share bin 7, shares 1/4, 1/2, 1/4:
	// -(2 x 0.25 ln 0.25 + 0.5 ln 0.5) / ln 16 = 0.375.
	if got := shannonEntropyRule(series, 16, 0, false); !near(got, 0.375, 1e-12) {
		t.Errorf("first-rule entropy = %.10f, want 0.375 (649 in bin 7)", got)
	}
	// Every edge of every range 600..600+span is an exact edge: count, per
	// value, the bin an exact rational comparison gives (lo + k w <= v <
	// lo + (k+1) w, written without division) and compare.
	for span := 16; span <= 400; span++ {
		var xs []float64
		for v := 600; v <= 600+span; v++ {
			xs = append(xs, float64(v))
		}
		counts := make([]int, 16)
		for _, x := range xs {
			d := int(x) - 600
			k := 0
			for k < 15 && (k+1)*span <= d*16 {
				k++
			}
			counts[k]++
		}
		want := 0.0
		for _, c := range counts {
			if c > 0 {
				p := float64(c) / float64(len(xs))
				want -= p * math.Log(p)
			}
		}
		want /= math.Log(16)
		if got := shannonEntropy(xs, 16, 0); !near(got, want, 1e-12) {
			t.Fatalf("span %d: exact entropy %.12f, histogram by comparison %.12f", span, got, want)
		}
	}
}

func TestShannonEntropy(t *testing.T) {
	uniform := make([]float64, 160)
	for i := range uniform {
		uniform[i] = float64(i) // 0..159: ten values in each of 16 equal bins (hand-worked)
	}
	withOutliers := append([]float64{-900, -800, -700, -600, -500, -400, -300, -200}, uniform...)
	withOutliers = append(withOutliers, 5000, 5100, 5200, 5300, 5400, 5500, 5600, 5700)
	tests := []struct {
		name       string
		rr         []float64
		bins, trim int
		want       float64
	}{
		// hand-worked: an even spread over all bins gives -ln(1/16)/ln 16 = 1.
		{"uniform over 16 bins", uniform, 16, 0, 1},
		// hand-worked: the 8 lowest and 8 highest are removed, leaving the
		// even spread above, so still 1.
		{"uniform after trim 8", withOutliers, 16, 8, 1},
		// hand-worked: a constant series puts everything in one bin: 0.
		{"constant", []float64{800, 800, 800, 800, 800}, 16, 0, 0},
		// hand-worked: bins [0,0.5) and [0.5,1]: p = 3/4, 1/4;
		// -(0.75 ln 0.75 + 0.25 ln 0.25)/ln 2 = 0.8112781.
		{"three to one", []float64{0, 0, 0, 1}, 2, 0, 0.8112781244591328},
		// hand-worked: the two extremes are trimmed, leaving 0,0,0,1 as above.
		{"three to one after trim", []float64{100, 0, 0, 0, 1, -50}, 2, 1, 0.8112781244591328},
		// hand-worked: range [1,4] in 4 bins of width 0.75: 1 -> bin 0,
		// 2 -> bin 1, 3 -> bin 2, 4 -> upper edge, bin 3; counts 1,2,3,2 of 8;
		// -(1/8 ln 1/8 + 2 (1/4 ln 1/4) + 3/8 ln 3/8)/ln 4 = 0.9528195.
		{"four bins", []float64{1, 2, 2, 3, 3, 3, 4, 4}, 4, 0, 0.9528195311147832},
		// hand-worked: nothing left after trimming, documented as 0.
		{"all trimmed", []float64{1, 2, 3, 4}, 4, 2, 0},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			in := append([]float64(nil), tc.rr...)
			got := shannonEntropy(in, tc.bins, tc.trim)
			if !near(got, tc.want, 1e-12) {
				t.Errorf("shannonEntropy = %.10f, want %.10f", got, tc.want)
			}
			// No value of these series lies on an edge the floating-point
			// rule misses, so the first rule agrees.
			if old := shannonEntropyRule(in, tc.bins, tc.trim, false); !near(old, tc.want, 1e-12) {
				t.Errorf("first-rule entropy = %.10f, want %.10f", old, tc.want)
			}
			for i := range in {
				if in[i] != tc.rr[i] {
					t.Fatalf("input modified at %d: %v, want %v", i, in[i], tc.rr[i])
				}
			}
		})
	}
}

func TestTurningPoints(t *testing.T) {
	tests := []struct {
		name string
		x    []float64
		want int
	}{
		// hand-worked: 3 is a maximum, 2 a minimum, 4 a maximum.
		{"alternating", []float64{1, 3, 2, 4, 1}, 3},
		// hand-worked: a monotone series has no interior extremum.
		{"monotone", []float64{1, 2, 3, 4, 5}, 0},
		// hand-worked: plateaus are not strict extrema.
		{"plateau", []float64{1, 2, 2, 1}, 0},
		// hand-worked: fewer than three points have no interior point.
		{"short", []float64{1, 2}, 0},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			if got := TurningPoints(tc.x); got != tc.want {
				t.Errorf("TurningPoints(%v) = %d, want %d", tc.x, got, tc.want)
			}
		})
	}
}

func TestTurningPointBand(t *testing.T) {
	// computed, check-values.md (Brockwell & Davis 2002 p.36, verified): at
	// n = 128 the 95% band is 74.7-93.3 turning points.
	lo, hi := TurningPointBand(128, 1.96)
	if !near(lo, 74.7, 0.05) || !near(hi, 93.3, 0.05) {
		t.Errorf("TurningPointBand(128, 1.96) = %.3f-%.3f, want 74.7-93.3", lo, hi)
	}
	// verified (Brockwell & Davis 2002 p.36): the band is centred on 2(n-2)/3 = 84.
	if got := (lo + hi) / 2; !near(got, 84, 1e-9) {
		t.Errorf("band centre = %v, want 84", got)
	}
}

// TestTurningPointsRandom checks the counting against the classical moments of
// the turning point test on independent uniform series.
func TestTurningPointsRandom(t *testing.T) {
	const n, reps = 128, 20000
	rng := rand.New(rand.NewPCG(20090901, 1701))
	x := make([]float64, n)
	counts := make([]float64, reps)
	lo, hi := TurningPointBand(n, 1.96)
	inside := 0
	for r := range counts {
		for i := range x {
			x[i] = rng.Float64()
		}
		c := TurningPoints(x)
		counts[r] = float64(c)
		if float64(c) >= lo && float64(c) <= hi {
			inside++
		}
	}
	var m float64
	for _, c := range counts {
		m += c
	}
	m /= reps
	var v float64
	for _, c := range counts {
		v += (c - m) * (c - m)
	}
	v /= reps - 1

	// verified (Brockwell & Davis 2002 p.36): mean 2(n-2)/3, variance (16n-29)/90.
	wantMean := 2 * float64(n-2) / 3
	wantVar := (16*float64(n) - 29) / 90
	se := math.Sqrt(wantVar / reps)
	if !near(m, wantMean, 4*se) {
		t.Errorf("mean turning points = %.4f, want %.4f within 4 SE (%.4f)", m, wantMean, 4*se)
	}
	// The standard error of a sample variance of a near-normal count is about
	// var*sqrt(2/(reps-1)) (normal approximation, ours); allow 5 of them.
	seVar := wantVar * math.Sqrt(2/float64(reps-1))
	if !near(v, wantVar, 5*seVar) {
		t.Errorf("variance of turning points = %.4f, want %.4f within %.4f", v, wantVar, 5*seVar)
	}
	// Normal approximation with continuity correction (hand-worked, ours):
	// P(75 <= count <= 93) is about 0.955, so the band holds about 95%.
	if share := float64(inside) / reps; share < 0.93 || share > 0.975 {
		t.Errorf("share inside the 1.96 SD band = %.4f, want about 0.95", share)
	}
}

// sinusLike makes RR intervals around 800 ms with a smooth 2% respiratory
// modulation (a 4 s breathing cycle) and +-2 ms of independent noise.
func sinusLike(n int, rng *rand.Rand) []float64 {
	rr := make([]float64, n)
	var t float64
	for i := range rr {
		rr[i] = 800*(1+0.02*math.Sin(2*math.Pi*t/4000)) + (rng.Float64()*4 - 2)
		t += rr[i]
	}
	return rr
}

// afLike makes independent intervals spread evenly over 400-1200 ms.
func afLike(n int, rng *rand.Rand) []float64 {
	rr := make([]float64, n)
	for i := range rr {
		rr[i] = 400 + 800*rng.Float64()
	}
	return rr
}

func TestAnalyseSinusVersusAF(t *testing.T) {
	p := DefaultParams()
	const segs = 50
	tests := []struct {
		name        string
		rr          []float64
		minShareAF  float64
		maxShareAF  float64
		checkNRMSSD func(float64) bool
	}{
		// A smooth 2% modulation of 800 ms moves successive beats by about
		// 800*0.02*2*pi*0.8/4 = 20 ms at most (hand-worked), far below
		// 0.1 x 800 ms, so no segment may be AF-like.
		{"sinus-like", sinusLike(segs*p.SegmentBeats, rand.New(rand.NewPCG(1, 2))), 0, 0,
			func(v float64) bool { return v < p.NRMSSDMin }},
		// Independent uniform 400-1200 ms: RMSSD about sqrt(2 x 800^2/12) = 327 ms,
		// normalised about 0.41 (hand-worked); entropy near 1; turning points
		// inside the 95% band in about 95% of segments (see above).
		{"af-like", afLike(segs*p.SegmentBeats, rand.New(rand.NewPCG(3, 4))), 0.85, 1,
			func(v float64) bool { return v > p.NRMSSDMin }},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			got := Analyse(tc.rr, p)
			if len(got) != segs {
				t.Fatalf("segments = %d, want %d", len(got), segs)
			}
			sum := Summarise(got)
			share := float64(sum.AFLike) / float64(sum.Segments)
			if share < tc.minShareAF || share > tc.maxShareAF {
				t.Errorf("AF-like share = %.3f, want %.2f-%.2f (summary %+v)", share, tc.minShareAF, tc.maxShareAF, sum)
			}
			for _, s := range got {
				if !tc.checkNRMSSD(s.NRMSSD) {
					t.Errorf("segment at %d: NRMSSD %.4f on the wrong side of %.2f", s.Start, s.NRMSSD, p.NRMSSDMin)
				}
				if s.AFLike != p.AFLike(s) {
					t.Errorf("segment at %d: AFLike %v but Params.AFLike %v", s.Start, s.AFLike, p.AFLike(s))
				}
			}
		})
	}
}

func TestAnalyseSegmentation(t *testing.T) {
	p := DefaultParams()
	p.SegmentBeats = 10
	p.Trim = 1
	rr := afLike(35, rand.New(rand.NewPCG(5, 6)))
	got := Analyse(rr, p)
	// hand-worked: 35 beats in segments of 10 give 3 segments; the 5-beat tail is ignored.
	wantStarts := []int{0, 10, 20}
	if len(got) != len(wantStarts) {
		t.Fatalf("segments = %d, want %d", len(got), len(wantStarts))
	}
	for i, s := range got {
		seg := rr[s.Start : s.Start+p.SegmentBeats]
		if s.Start != wantStarts[i] {
			t.Errorf("segment %d start = %d, want %d", i, s.Start, wantStarts[i])
		}
		if !near(s.NRMSSD, NormalisedRMSSD(seg), 1e-12) {
			t.Errorf("segment %d NRMSSD = %v, want %v", i, s.NRMSSD, NormalisedRMSSD(seg))
		}
		if !near(s.Entropy, shannonEntropy(seg, p.Bins, p.Trim), 1e-12) {
			t.Errorf("segment %d entropy = %v, want %v", i, s.Entropy, shannonEntropy(seg, p.Bins, p.Trim))
		}
		if s.TurningPoints != TurningPoints(seg) {
			t.Errorf("segment %d turning points = %d, want %d", i, s.TurningPoints, TurningPoints(seg))
		}
		// TPR = turning points / interior points (SegmentBeats-2).
		if !near(s.TPR, float64(s.TurningPoints)/8, 1e-12) {
			t.Errorf("segment %d TPR = %v, want %v", i, s.TPR, float64(s.TurningPoints)/8)
		}
	}
	if got := Analyse(rr[:9], p); len(got) != 0 {
		t.Errorf("Analyse of a short series gave %d segments, want 0", len(got))
	}
	bad := p
	bad.Bins = 0
	if got := Analyse(rr, bad); len(got) != 0 {
		t.Errorf("Analyse with invalid params gave %d segments, want 0", len(got))
	}
}

func TestSummarise(t *testing.T) {
	segs := []Segment{
		{NRMSSD: 0.2, Entropy: 0.9, TPR: 0.6, AFLike: true},
		{NRMSSD: 0.0, Entropy: 0.1, TPR: 0.2},
	}
	// hand-worked: 1 of 2 AF-like; means 0.1, 0.5, 0.4.
	want := Summary{Segments: 2, AFLike: 1, MeanNRMSSD: 0.1, MeanEntropy: 0.5, MeanTPR: 0.4}
	got := Summarise(segs)
	if got.Segments != want.Segments || got.AFLike != want.AFLike ||
		!near(got.MeanNRMSSD, want.MeanNRMSSD, 1e-12) || !near(got.MeanEntropy, want.MeanEntropy, 1e-12) ||
		!near(got.MeanTPR, want.MeanTPR, 1e-12) {
		t.Errorf("Summarise = %+v, want %+v", got, want)
	}
	if got := Summarise(nil); got != (Summary{}) {
		t.Errorf("Summarise(nil) = %+v, want zero", got)
	}
}

func TestParamsValidate(t *testing.T) {
	if err := DefaultParams().Validate(); err != nil {
		t.Fatalf("DefaultParams().Validate() = %v", err)
	}
	tests := []struct {
		name  string
		edit  func(*Params)
		field string
	}{
		{"segment too short", func(p *Params) { p.SegmentBeats = 2 }, "segment_beats"},
		{"one bin", func(p *Params) { p.Bins = 1 }, "bins"},
		{"negative trim", func(p *Params) { p.Trim = -1 }, "trim"},
		{"trim eats segment", func(p *Params) { p.Trim = 64 }, "trim"},
		{"negative nrmssd", func(p *Params) { p.NRMSSDMin = -0.1 }, "nrmssd_min"},
		{"nan nrmssd", func(p *Params) { p.NRMSSDMin = math.NaN() }, "nrmssd_min"},
		{"entropy above 1", func(p *Params) { p.EntropyMin = 1.5 }, "entropy_min"},
		{"zero band", func(p *Params) { p.TPRBandSD = 0 }, "tpr_band_sd"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			p := DefaultParams()
			tc.edit(&p)
			err := p.Validate()
			var ve *cohort.ValidationError
			if !errors.As(err, &ve) {
				t.Fatalf("Validate() = %v, want *cohort.ValidationError", err)
			}
			if _, ok := ve.Fields[tc.field]; !ok || len(ve.Fields) != 1 {
				t.Errorf("Validate() fields = %v, want only %q", ve.Fields, tc.field)
			}
		})
	}
	var ve cohort.ValidationError
	bad := DefaultParams()
	bad.Bins = 0
	bad.ValidateInto(&ve, "rr.")
	if _, ok := ve.Fields["rr.bins"]; !ok {
		t.Errorf("ValidateInto with prefix gave %v, want key rr.bins", ve.Fields)
	}
}

func BenchmarkAnalyse(b *testing.B) {
	rr := afLike(128*100, rand.New(rand.NewPCG(7, 8)))
	p := DefaultParams()
	b.ReportAllocs()
	for b.Loop() {
		Analyse(rr, p)
	}
	b.ReportMetric(float64(len(rr))*float64(b.N)/b.Elapsed().Seconds(), "beats/s")
}
