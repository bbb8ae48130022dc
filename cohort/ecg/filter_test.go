package ecg

import (
	"math"
	"math/cmplx"
	"math/rand/v2"
	"testing"
)

// impulse returns the first n samples of a stage's impulse response.
func impulse(tb testing.TB, stage func([]float64) []float64, n int) []float64 {
	tb.Helper()
	x := make([]float64, n)
	x[0] = 1
	return stage(x)
}

// gainAt is |H(f)| of an FIR impulse response h at f Hz, sampled at 200 Hz.
func gainAt(h []float64, f float64) float64 {
	var s complex128
	for k, v := range h {
		s += complex(v, 0) * cmplx.Exp(complex(0, -2*math.Pi*f/ptRate*float64(k)))
	}
	return cmplx.Abs(s)
}

// crossing finds by bisection the frequency in [lo, hi] where gainAt crosses
// level; gain must be monotonic there.
func crossing(tb testing.TB, h []float64, level, lo, hi float64) float64 {
	tb.Helper()
	glo := gainAt(h, lo) - level
	if glo*(gainAt(h, hi)-level) > 0 {
		tb.Fatalf("no crossing of %g in [%g, %g] Hz", level, lo, hi)
	}
	for range 60 {
		mid := (lo + hi) / 2
		if (gainAt(h, mid)-level)*glo > 0 {
			lo = mid
		} else {
			hi = mid
		}
	}
	return (lo + hi) / 2
}

func TestLowPassMatchesPublishedDifferenceEquation(t *testing.T) {
	// The published recursion y(n) = 2y(n-1) - y(n-2) + x(n) - 2x(n-6) +
	// x(n-12) (check-values.md, verified), run literally on random input,
	// must agree with our box-sum form.
	rng := rand.New(rand.NewPCG(1, 2))
	x := make([]float64, 400)
	for i := range x {
		x[i] = rng.NormFloat64()
	}
	at := func(s []float64, n int) float64 {
		if n < 0 {
			return 0
		}
		return s[n]
	}
	want := make([]float64, len(x))
	for n := range x {
		want[n] = 2*at(want, n-1) - at(want, n-2) + x[n] - 2*at(x, n-6) + at(x, n-12)
	}
	got := lowPass(x)
	for n := range x {
		if math.Abs(got[n]-want[n]) > 1e-9 {
			t.Fatalf("n=%d: got %g, want %g", n, got[n], want[n])
		}
	}
}

func TestLowPassResponse(t *testing.T) {
	h := impulse(t, lowPass, 64)
	// DC gain 36 (computed, check-values.md).
	if got, want := gainAt(h, 0), 36.0; math.Abs(got-want) > 1e-9 {
		t.Errorf("DC gain: got %g, want %g", got, want)
	}
	// -3 dB near 11 Hz, computed 10.78 Hz (check-values.md).
	f3 := crossing(t, h, 36/math.Sqrt2, 1, 30)
	t.Logf("low-pass -3 dB at %.4f Hz", f3)
	if got, want := f3, 10.78; math.Abs(got-want) > 0.01 {
		t.Errorf("-3 dB point: got %.4f Hz, want %.2f Hz", got, want)
	}
	// Delay 5 samples (check-values.md): the response is symmetric about 5.
	for k := 0; k <= 5; k++ {
		if h[5-k] != h[5+k] {
			t.Errorf("h[%d] = %g, h[%d] = %g: not symmetric about 5", 5-k, h[5-k], 5+k, h[5+k])
		}
	}
	// A second, independent check of the corner: a 10.78 Hz sine in steady
	// state comes out at 36/sqrt(2) of its amplitude.
	x := make([]float64, 2000)
	for n := range x {
		x[n] = math.Sin(2 * math.Pi * 10.78 / ptRate * float64(n))
	}
	y := lowPass(x)
	peak := 0.0
	for _, v := range y[1000:] {
		peak = math.Max(peak, math.Abs(v))
	}
	if want := 36 / math.Sqrt2; math.Abs(peak-want)/want > 0.01 {
		t.Errorf("sine at 10.78 Hz: amplitude %g, want %g", peak, want)
	}
}

func TestHighPassResponse(t *testing.T) {
	h := impulse(t, highPass, 64)
	// Independent form: x(n-16) - (1/32) * sum of x(n)..x(n-31)
	// (check-values.md, verified).
	for k, got := range h {
		want := 0.0
		if k == 16 {
			want = 1
		}
		if k < 32 {
			want -= 1.0 / 32
		}
		if math.Abs(got-want) > 1e-15 {
			t.Fatalf("h[%d]: got %g, want %g", k, got, want)
		}
	}
	if got := gainAt(h, 0); got > 1e-12 {
		t.Errorf("DC gain: got %g, want 0", got)
	}
	if got := gainAt(h, 100); math.Abs(got-1) > 1e-12 {
		t.Errorf("gain at 100 Hz: got %g, want 1", got)
	}
	// -3 dB near 5 Hz, computed 4.72 Hz (check-values.md).
	f3 := crossing(t, h, 1/math.Sqrt2, 0.5, 6)
	t.Logf("high-pass -3 dB at %.4f Hz", f3)
	if got, want := f3, 4.72; math.Abs(got-want) > 0.01 {
		t.Errorf("-3 dB point: got %.4f Hz, want %.2f Hz", got, want)
	}
}

func TestDerivativeForm(t *testing.T) {
	// The 1985 paper's derivative (1/8T)(-z^-2 - 2z^-1 + 2z + z^2)
	// (check-values.md, verified), causal with a delay of 2: taps
	// 1, 2, 0, -2, -1 over 8T.
	h := impulse(t, derivative, 8)
	want := []float64{1, 2, 0, -2, -1, 0, 0, 0}
	for k := range want {
		if got := h[k] * 8 / ptRate; math.Abs(got-want[k]) > 1e-12 {
			t.Errorf("tap %d: got %g, want %g", k, got, want[k])
		}
	}
	// On a ramp of slope 3 per second it returns 3 (a true derivative).
	x := make([]float64, 50)
	for n := range x {
		x[n] = 3 * float64(n) / ptRate
	}
	if got := derivative(x)[20]; math.Abs(got-3) > 1e-9 {
		t.Errorf("ramp slope: got %g, want 3", got)
	}
	// Frequency response j(sin 2wT + 2 sin wT)/(4T) (computed from the
	// transfer function) at 5 Hz.
	w := 2 * math.Pi * 5 / ptRate
	if got, want := gainAt(h, 5), (math.Sin(2*w)+2*math.Sin(w))*ptRate/4; math.Abs(got-want) > 1e-9 {
		t.Errorf("gain at 5 Hz: got %g, want %g", got, want)
	}
}

func TestSquareIntegrateWindow(t *testing.T) {
	// 150 ms at 200 Hz = 30 samples (check-values.md): a single unit
	// derivative sample stays in the window for exactly 30 outputs.
	d := make([]float64, 100)
	d[10] = 2
	y := squareIntegrate(d)
	for n, got := range y {
		want := 0.0
		if n >= 10 && n < 40 {
			want = 4.0 / 30
		}
		if math.Abs(got-want) > 1e-12 {
			t.Errorf("n=%d: got %g, want %g", n, got, want)
		}
	}
}

func TestSmoothKeepsDCAndPeakPosition(t *testing.T) {
	const fs = 500
	x := make([]float64, 1000)
	for i := range x {
		dt := float64(i-500) / fs
		x[i] = 2 + math.Exp(-dt*dt/(2*0.01*0.01))
	}
	y := smooth(x, fs)
	if math.Abs(y[50]-2) > 1e-9 {
		t.Errorf("DC: got %g, want 2", y[50])
	}
	best := 0
	for i := range y {
		if y[i] > y[best] {
			best = i
		}
	}
	if best != 500 {
		t.Errorf("peak moved from 500 to %d", best)
	}
}

func TestResampleLinear(t *testing.T) {
	tests := []struct {
		fs    float64
		n     int
		wantN int
	}{
		{500, 1000, 400}, // (999*200/500)+1 = 400.6 -> 400
		{250, 1000, 800},
		{125, 100, 159},
		{200, 10, 10},
	}
	for _, tt := range tests {
		x := make([]float64, tt.n)
		for i := range x {
			x[i] = 0.5 + 2*float64(i)/tt.fs // a ramp in time survives linear interpolation
		}
		y := resample(x, tt.fs)
		if len(y) != tt.wantN {
			t.Errorf("fs=%g: got %d samples, want %d", tt.fs, len(y), tt.wantN)
			continue
		}
		for j, got := range y {
			if want := 0.5 + 2*float64(j)/ptRate; math.Abs(got-want) > 1e-9 {
				t.Errorf("fs=%g j=%d: got %g, want %g", tt.fs, j, got, want)
				break
			}
		}
	}
}
