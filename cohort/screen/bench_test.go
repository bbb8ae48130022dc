package screen

import (
	"sync"
	"testing"
	"time"

	"cohortdesk/cohort"
)

// Benchmark data: one dense participant-week (a reading every 5 s on average,
// 120,960 readings) and 1,000 participant-weeks at one every 10 s (about 60
// million readings, 0.7 GB), half sinus-like and half af-like. Built once per
// test binary, outside the timed loops.
var (
	benchOnce  sync.Once
	benchDense cohort.Week
	benchWeeks []cohort.Week
	benchTotal int
)

func benchData(b *testing.B) (cohort.Week, []cohort.Week, int) {
	b.Helper()
	benchOnce.Do(func() {
		benchDense = synthWeek(b, synth{seed: 1, rhythm: afLike, cadenceMs: 5_000, walks: 3})
		benchWeeks = make([]cohort.Week, 1000)
		for i := range benchWeeks {
			benchWeeks[i] = synthWeek(b, synth{seed: uint64(100 + i), rhythm: rhythm(i % 2), cadenceMs: 10_000, walks: 2})
			benchTotal += benchWeeks[i].HR.Len()
		}
	})
	return benchDense, benchWeeks, benchTotal
}

// cpuMeter measures process CPU time across a benchmark's timed loop.
type cpuMeter struct{ start time.Duration }

func startCPU(b *testing.B) cpuMeter {
	b.Helper()
	return cpuMeter{processCPU()}
}

// readingsPerSecond reports throughput per second of wall time and, where
// the platform tells, per second of CPU time used by the process (the test
// binary runs the benchmark on one goroutine, so this is close to per core
// even when other processes share the machine).
func readingsPerSecond(b *testing.B, readingsPerOp int, cpu ...cpuMeter) {
	b.Helper()
	total := float64(readingsPerOp) * float64(b.N)
	b.ReportMetric(total/b.Elapsed().Seconds(), "readings/s")
	if len(cpu) == 1 {
		if used := processCPU() - cpu[0].start; used > 0 && cpu[0].start > 0 {
			b.ReportMetric(total/used.Seconds(), "readings/cpu-s")
		}
	}
}

// scanSink keeps the baseline scan from being optimised away.
var scanSink int64

// scan is the least any pass over the readings must do: read every time and
// value once. It is the same-run baseline the window pass is compared with,
// since absolute figures move with the machine and its load.
func scan(w *cohort.Week) int64 {
	var s int64
	t, v := w.HR.T, w.HR.V[:len(w.HR.T)]
	for i := range t {
		s += t[i] ^ int64(v[i])
	}
	return s
}

// BenchmarkScanBaseline is the same-run baseline for BenchmarkSummariseWindows.
func BenchmarkScanBaseline(b *testing.B) {
	dense, weeks, total := benchData(b)
	b.Run("week", func(b *testing.B) {
		cpu := startCPU(b)
		for b.Loop() {
			scanSink += scan(&dense)
		}
		readingsPerSecond(b, dense.HR.Len(), cpu)
	})
	b.Run("1000weeks", func(b *testing.B) {
		cpu := startCPU(b)
		for b.Loop() {
			for i := range weeks {
				scanSink += scan(&weeks[i])
			}
		}
		readingsPerSecond(b, total, cpu)
	})
}

// BenchmarkSummariseWindows is the hot path: one window size over the
// readings, reusing the summary slice.
func BenchmarkSummariseWindows(b *testing.B) {
	dense, weeks, total := benchData(b)
	b.Run("week/5min", func(b *testing.B) {
		buf := SummariseWindows(nil, &dense, 5)
		b.ReportAllocs()
		cpu := startCPU(b)
		for b.Loop() {
			buf = SummariseWindows(buf, &dense, 5)
		}
		readingsPerSecond(b, dense.HR.Len(), cpu)
	})
	b.Run("week/30min", func(b *testing.B) {
		buf := SummariseWindows(nil, &dense, 30)
		b.ReportAllocs()
		cpu := startCPU(b)
		for b.Loop() {
			buf = SummariseWindows(buf, &dense, 30)
		}
		readingsPerSecond(b, dense.HR.Len(), cpu)
	})
	b.Run("1000weeks/5min", func(b *testing.B) {
		buf := SummariseWindows(nil, &weeks[0], 5)
		b.ReportAllocs()
		cpu := startCPU(b)
		for b.Loop() {
			for i := range weeks {
				buf = SummariseWindows(buf, &weeks[i], 5)
			}
		}
		readingsPerSecond(b, total, cpu)
	})
}

// BenchmarkPrepare reduces a cleaned week for both default window sizes (two
// passes over the readings) and, as the synthetic weeks have no RR data, no
// RR scoring.
func BenchmarkPrepare(b *testing.B) {
	dense, weeks, total := benchData(b)
	p := DefaultProtocol()
	b.Run("week", func(b *testing.B) {
		b.ReportAllocs()
		cpu := startCPU(b)
		for b.Loop() {
			Prepare(&dense, p)
		}
		readingsPerSecond(b, dense.HR.Len(), cpu)
	})
	b.Run("1000weeks", func(b *testing.B) {
		b.ReportAllocs()
		cpu := startCPU(b)
		for b.Loop() {
			for i := range weeks {
				Prepare(&weeks[i], p)
			}
		}
		readingsPerSecond(b, total, cpu)
	})
}

// BenchmarkScreen is the whole per-week pipeline: validate, clean (copying),
// digest (SHA-256 over 12 bytes per reading), prepare, evaluate with reason.
func BenchmarkScreen(b *testing.B) {
	dense, weeks, total := benchData(b)
	p := DefaultProtocol()
	b.Run("week", func(b *testing.B) {
		b.ReportAllocs()
		cpu := startCPU(b)
		for b.Loop() {
			if _, err := Screen(&dense, p, testNow, nil); err != nil {
				b.Fatal(err)
			}
		}
		readingsPerSecond(b, dense.HR.Len(), cpu)
	})
	b.Run("1000weeks", func(b *testing.B) {
		b.ReportAllocs()
		cpu := startCPU(b)
		for b.Loop() {
			for i := range weeks {
				if _, err := Screen(&weeks[i], p, testNow, nil); err != nil {
					b.Fatal(err)
				}
			}
		}
		readingsPerSecond(b, total, cpu)
	})
}

func BenchmarkCleanWeek(b *testing.B) {
	dense, _, _ := benchData(b)
	p := DefaultProtocol()
	b.ReportAllocs()
	cpu := startCPU(b)
	for b.Loop() {
		Clean(&dense, p, testNow)
	}
	readingsPerSecond(b, dense.HR.Len(), cpu)
}

func BenchmarkInputDigestWeek(b *testing.B) {
	dense, _, _ := benchData(b)
	b.ReportAllocs()
	cpu := startCPU(b)
	for b.Loop() {
		InputDigest(&dense)
	}
	readingsPerSecond(b, dense.HR.Len(), cpu)
}

// BenchmarkSweep re-thresholds 1,000 prepared weeks for 20 values of the
// 5-minute MASD threshold.
func BenchmarkSweep(b *testing.B) {
	_, weeks, _ := benchData(b)
	p := DefaultProtocol()
	prepared := make([]*Prepared, len(weeks))
	for i := range weeks {
		prepared[i] = Prepare(&weeks[i], p)
	}
	values := make([]float64, 20)
	for i := range values {
		values[i] = 1 + float64(i)
	}
	b.ReportAllocs()
	for b.Loop() {
		if _, err := Sweep(prepared, nil, p, "windows[0].masd_threshold", values); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(len(weeks)*len(values))*float64(b.N)/b.Elapsed().Seconds(), "week-verdicts/s")
}
