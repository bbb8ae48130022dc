package demo

import (
	"runtime"
	"sync"
	"sync/atomic"
	"testing"
)

// BenchmarkGenerate generates the whole default study, counting readings
// without keeping them, and reports the rate.
func BenchmarkGenerate(b *testing.B) {
	var total int
	for b.Loop() {
		s, err := New(Config{Seed: 1})
		if err != nil {
			b.Fatal(err)
		}
		total = 0
		for _, p := range s.Participants {
			for w := range s.Weeks(p) {
				total += Readings(&w)
			}
		}
	}
	b.ReportMetric(float64(total), "readings/op")
	b.ReportMetric(float64(total)*float64(b.N)/b.Elapsed().Seconds(), "readings/s")
}

// BenchmarkGenerateParallel is the same with one goroutine per CPU taking
// participants in turn, as a loader would run it.
func BenchmarkGenerateParallel(b *testing.B) {
	var total atomic.Int64
	for b.Loop() {
		s, err := New(Config{Seed: 1})
		if err != nil {
			b.Fatal(err)
		}
		total.Store(0)
		var next atomic.Int64
		var wg sync.WaitGroup
		for range runtime.GOMAXPROCS(0) {
			wg.Go(func() {
				for {
					i := int(next.Add(1) - 1)
					if i >= len(s.Participants) {
						return
					}
					n := 0
					for w := range s.Weeks(s.Participants[i]) {
						n += Readings(&w)
					}
					total.Add(int64(n))
				}
			})
		}
		wg.Wait()
	}
	b.ReportMetric(float64(total.Load()), "readings/op")
	b.ReportMetric(float64(total.Load())*float64(b.N)/b.Elapsed().Seconds(), "readings/s")
}
