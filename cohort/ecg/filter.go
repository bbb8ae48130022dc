package ecg

import "math"

// The detector's filter stages run at 200 samples/s, the rate for which Pan
// and Tompkins (IEEE Trans Biomed Eng 1985;32(3):230-6) designed their
// integer-coefficient filters. Every stage takes x(n) = 0 for n < 0; the
// detector pads the signal so that no start-up transient reaches the data.
const (
	ptRate = 200.0
	// Delays of the linear-phase stages, in samples at 200 Hz (check-values.md:
	// low-pass 5, high-pass 16; the derivative, made causal, 2).
	lowPassDelay   = 5
	highPassDelay  = 16
	derivDelay     = 2
	bandPassDelay  = lowPassDelay + highPassDelay
	integratorSpan = 30 // 150 ms at 200 Hz
)

// lowPass is y(n) = 2y(n-1) - y(n-2) + x(n) - 2x(n-6) + x(n-12). Its transfer
// function ((1 - z^-6)/(1 - z^-1))^2 is an 11-tap triangular FIR, and that is
// how it is computed here: two 6-sample box sums in a row. The recursion as
// printed has a double pole at z = 1 that only cancels in exact integer
// arithmetic; in floating point its rounding errors grow with the square of
// the recording length, the box sums' do not grow at all.
func lowPass(x []float64) []float64 {
	box := func(in []float64) []float64 {
		out := make([]float64, len(in))
		for n := range in {
			s := 0.0
			for k := 0; k < 6 && k <= n; k++ {
				s += in[n-k]
			}
			out[n] = s
		}
		return out
	}
	return box(box(x))
}

// highPass is y(n) = x(n-16) - (1/32) * (x(n) + ... + x(n-31)): an all-pass
// delay minus a 32-sample moving average. The running sum is updated, not
// recomputed; its rounding error is a random walk far below the signal.
func highPass(x []float64) []float64 {
	y := make([]float64, len(x))
	sum := 0.0
	for n := range x {
		sum += x[n]
		if n >= 32 {
			sum -= x[n-32]
		}
		d := 0.0
		if n >= 16 {
			d = x[n-16]
		}
		y[n] = d - sum/32
	}
	return y
}

// derivative is the five-point derivative of the 1985 paper,
// H(z) = (1/8T)(-z^-2 - 2z^-1 + 2z + z^2), made causal by a delay of two
// samples: y(n) = (x(n) + 2x(n-1) - 2x(n-3) - x(n-4)) / (8T). We chose the
// paper's form over the book's (-2z^-2 - z^-1 + z + 2z^2)/8 because its gain on
// a ramp is exactly 1, so y is a true slope in units per second.
func derivative(x []float64) []float64 {
	y := make([]float64, len(x))
	at := func(n int) float64 {
		if n < 0 {
			return 0
		}
		return x[n]
	}
	for n := range x {
		y[n] = (at(n) + 2*at(n-1) - 2*at(n-3) - at(n-4)) * ptRate / 8
	}
	return y
}

// squareIntegrate squares the derivative point by point and averages the last
// 30 squares (150 ms): the moving-window integrator.
func squareIntegrate(d []float64) []float64 {
	y := make([]float64, len(d))
	sum := 0.0
	for n, v := range d {
		sum += v * v
		if n >= integratorSpan {
			sum -= d[n-integratorSpan] * d[n-integratorSpan]
		}
		y[n] = math.Max(sum, 0) / integratorSpan
	}
	return y
}

// smooth applies a zero-phase low-pass FIR (windowed sinc, Hamming window,
// cutoff 40 Hz, taps spanning +-25 ms) at the signal's own rate, replicating
// the end samples. It serves twice: as the anti-alias filter before the
// signal is brought down to 200 Hz, and as the light noise filter under the
// final R-peak search. Being symmetric, it moves no symmetric peak. At rates
// up to 200 Hz it returns a copy: interpolating up to 200 Hz cannot alias,
// and at such rates a 40 Hz filter would blunt the R peak it is meant to find.
func smooth(x []float64, fs float64) []float64 {
	out := make([]float64, len(x))
	if fs <= ptRate || len(x) == 0 {
		copy(out, x)
		return out
	}
	const cutoff = 40.0
	half := int(math.Round(0.025 * fs))
	taps := make([]float64, 2*half+1)
	sum := 0.0
	for k := -half; k <= half; k++ {
		t := float64(k)
		h := 2 * cutoff / fs
		if k != 0 {
			h = math.Sin(2*math.Pi*cutoff/fs*t) / (math.Pi * t)
		}
		h *= 0.54 + 0.46*math.Cos(math.Pi*t/float64(half))
		taps[k+half] = h
		sum += h
	}
	for i := range taps {
		taps[i] /= sum
	}
	n := len(x)
	for i := range x {
		s := 0.0
		if i >= half && i+half < n {
			win := x[i-half : i+half+1]
			for k, h := range taps {
				s += h * win[k]
			}
		} else {
			for k, h := range taps {
				j := min(max(i+k-half, 0), n-1)
				s += h * x[j]
			}
		}
		out[i] = s
	}
	return out
}

// resample brings x from fs to 200 Hz by linear interpolation between
// neighbouring samples (x should already be band-limited, see smooth). Output
// sample j is the input at time j/200 s.
func resample(x []float64, fs float64) []float64 {
	if fs == ptRate {
		out := make([]float64, len(x))
		copy(out, x)
		return out
	}
	if len(x) == 0 {
		return nil
	}
	m := int(math.Floor(float64(len(x)-1)*ptRate/fs)) + 1
	out := make([]float64, m)
	step := fs / ptRate
	for j := range out {
		u := float64(j) * step
		i := int(u)
		if i >= len(x)-1 {
			out[j] = x[len(x)-1]
			continue
		}
		fr := u - float64(i)
		out[j] = x[i] + fr*(x[i+1]-x[i])
	}
	return out
}
