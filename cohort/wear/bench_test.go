package wear

import (
	"bytes"
	"encoding/csv"
	"io"
	"math/rand/v2"
	"sync"
	"testing"
	"time"

	"cohortdesk/cohort"
)

const benchRows = 1_000_000

var benchCSV = sync.OnceValue(func() []byte { return genCSV(benchRows) })

func reportPerSecond(b *testing.B, n int, unit string) {
	b.ReportMetric(float64(n)*float64(b.N)/b.Elapsed().Seconds(), unit+"/s")
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(n)/float64(b.N), "ns/"+unit)
}

// BenchmarkCSVReader parses a generated one-million-row readings file held
// in memory.
func BenchmarkCSVReader(b *testing.B) {
	data := benchCSV()
	b.SetBytes(int64(len(data)))
	b.ReportAllocs()
	for b.Loop() {
		src := NewCSVReader(bytes.NewReader(data), "bench.csv")
		n := 0
		for src.Next() {
			if src.Rejection() != nil {
				b.Fatal(src.Rejection())
			}
			n++
		}
		if src.Err() != nil || n != benchRows {
			b.Fatalf("%d rows, %v", n, src.Err())
		}
	}
	reportPerSecond(b, benchRows, "rows")
}

// BenchmarkCSVBaselineEncodingCSV splits the same file into records with
// encoding/csv (reusing its record slice) and parses nothing: the baseline
// the CSV reader is compared with in the same run.
func BenchmarkCSVBaselineEncodingCSV(b *testing.B) {
	data := benchCSV()
	b.SetBytes(int64(len(data)))
	b.ReportAllocs()
	for b.Loop() {
		r := csv.NewReader(bytes.NewReader(data))
		r.ReuseRecord = true
		n := 0
		for {
			_, err := r.Read()
			if err == io.EOF {
				break
			}
			if err != nil {
				b.Fatal(err)
			}
			n++
		}
		if n != benchRows+1 {
			b.Fatalf("%d records", n)
		}
	}
	reportPerSecond(b, benchRows, "rows")
}

// BenchmarkCSVBaselineTimeParse parses the same number of timestamps with
// time.Parse, to show what the hand-written time parser saves.
func BenchmarkCSVBaselineTimeParse(b *testing.B) {
	stamps := []string{"2026-03-02T07:15:00-05:00", "2026-03-02T12:15:00Z", "2026-03-02T13:15:07+01:00"}
	for b.Loop() {
		for i := 0; i < benchRows; i++ {
			if _, err := time.Parse(time.RFC3339, stamps[i%3]); err != nil {
				b.Fatal(err)
			}
		}
	}
	reportPerSecond(b, benchRows, "times")
}

// BenchmarkFHIRReader parses a generated Bundle of 20,000 Observations.
func BenchmarkFHIRReader(b *testing.B) {
	const n = 20000
	data := genBundle(n)
	b.SetBytes(int64(len(data)))
	b.ReportAllocs()
	for b.Loop() {
		src := NewFHIRReader(bytes.NewReader(data), "bench.json", FHIROptions{})
		rows := 0
		for src.Next() {
			rows++
		}
		if src.Err() != nil || rows != n {
			b.Fatalf("%d rows, %v", rows, src.Err())
		}
	}
	reportPerSecond(b, n, "obs")
}

func benchSeries() cohort.Samples {
	return realisticHR(rand.New(rand.NewPCG(5, 6)), 7, false)
}

// BenchmarkEncode packs a realistic week of heart rate (rest every few
// minutes, exercise every few seconds).
func BenchmarkEncode(b *testing.B) {
	s := benchSeries()
	buf := make([]byte, 0, EncodedSizeHint(s.Len(), cohort.HeartRate))
	var size int
	for b.Loop() {
		buf = AppendEncode(buf[:0], s, cohort.HeartRate)
		size = len(buf)
	}
	reportPerSecond(b, s.Len(), "readings")
	b.ReportMetric(float64(size)/float64(s.Len()), "bytes/reading")
}

// BenchmarkEncodeMillis is BenchmarkEncode with millisecond timestamps,
// which cost about a byte more per reading.
func BenchmarkEncodeMillis(b *testing.B) {
	s := realisticHR(rand.New(rand.NewPCG(5, 6)), 7, true)
	var size int
	for b.Loop() {
		size = len(Encode(s, cohort.HeartRate))
	}
	reportPerSecond(b, s.Len(), "readings")
	b.ReportMetric(float64(size)/float64(s.Len()), "bytes/reading")
}

// BenchmarkEncodeSteps packs a week of per-minute step counts.
func BenchmarkEncodeSteps(b *testing.B) {
	s := stepsSeries(rand.New(rand.NewPCG(5, 6)), 7)
	var size int
	for b.Loop() {
		size = len(Encode(s, cohort.Steps))
	}
	reportPerSecond(b, s.Len(), "readings")
	b.ReportMetric(float64(size)/float64(s.Len()), "bytes/reading")
}

// BenchmarkDecode unpacks the same week, reusing the destination.
func BenchmarkDecode(b *testing.B) {
	s := benchSeries()
	enc := Encode(s, cohort.HeartRate)
	var out cohort.Samples
	b.ReportAllocs()
	for b.Loop() {
		if err := DecodeInto(&out, enc); err != nil {
			b.Fatal(err)
		}
	}
	reportPerSecond(b, s.Len(), "readings")
}

// BenchmarkMerge merges a week with a copy of itself (a re-import).
func BenchmarkMerge(b *testing.B) {
	s := benchSeries()
	for b.Loop() {
		if _, st := MergeWithStats(s, s); st.Duplicates != s.Len() {
			b.Fatal(st.Duplicates)
		}
	}
	reportPerSecond(b, 2*s.Len(), "readings")
}

// BenchmarkImportCPU is the CPU side of an import end to end: parse the
// million-row file, group by participant-week under a 64 MiB budget, and
// encode every flushed series, as the loader will before writing.
func BenchmarkImportCPU(b *testing.B) {
	data := benchCSV()
	ny, _ := time.LoadLocation("America/New_York")
	if ny == nil {
		ny = time.UTC
	}
	enrolled := cohort.Date{Year: 2026, Month: time.February, Day: 20}
	next := int64(0)
	lookup := func(string) (Participant, bool) {
		next++
		return Participant{ID: next, Enrolled: enrolled, Loc: ny}, true
	}
	b.SetBytes(int64(len(data)))
	b.ReportAllocs()
	var groups, encoded int
	for b.Loop() {
		groups, encoded = 0, 0
		g := NewGrouper(lookup, 64<<20)
		src := NewCSVReader(bytes.NewReader(data), "bench.csv")
		var buf []byte
		emit := func(gr Group) error {
			buf = AppendEncode(buf[:0], gr.Samples, gr.Key.Kind)
			groups++
			encoded += len(buf)
			return nil
		}
		for src.Next() {
			if rej := g.Add(src.Row()); rej != nil {
				b.Fatal(rej)
			}
			if g.OverBudget() {
				g.Flush(emit)
			}
		}
		g.Flush(emit)
	}
	reportPerSecond(b, benchRows, "rows")
	b.ReportMetric(float64(encoded)/benchRows, "bytes/reading")
	b.ReportMetric(float64(groups), "series")
}
