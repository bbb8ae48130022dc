package db_test

import (
	"bufio"
	"context"
	"flag"
	"fmt"
	"os"
	"path/filepath"
	"runtime"
	"runtime/metrics"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/db"
)

// verdictMemMB sizes the file of TestVerdictImportMemoryIsBounded; the
// README's figure is measured with -verdict-mem-mb 60.
var verdictMemMB = flag.Int("verdict-mem-mb", 8, "size in MB of the verdicts file the memory test imports")

// writeVerdictFile writes about mb megabytes of verdict lines for the
// participants VM-00000.. (weeks 0-63 of each, two models), with a conflicting
// line and an unknown participant every so often, and returns its path and
// the participants it needs.
func writeVerdictFile(t *testing.T, mb int) (string, int) {
	t.Helper()
	path := filepath.Join(t.TempDir(), "verdicts.csv")
	f, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	w := bufio.NewWriterSize(f, 1<<20)
	fmt.Fprintln(w, "study_id,study_week,score,verdict,model_name,model_version")
	limit := int64(mb) << 20
	var n int64
	line, participants := 0, 0
	for p := 0; n < limit; p++ {
		participants = p + 1
		for week := 0; week < 64 && n < limit; week++ {
			for _, model := range []string{"rhythm-net", "pulse-judge"} {
				verdict := "negative"
				if (p*7+week)%29 == 0 {
					verdict = "positive"
				}
				line++
				sid := fmt.Sprintf("VM-%05d", p)
				if line%5000 == 0 {
					sid = "VM-UNKNOWN" // refused: no such participant
				}
				k, _ := fmt.Fprintf(w, "%s,%d,0.%04d,%s,%s,3.%d\n", sid, week, (p*31+week*17)%10000, verdict, model, week%3)
				n += int64(k)
				if line%7000 == 0 { // the same key again with another verdict: refused as a conflict
					k, _ = fmt.Fprintf(w, "%s,%d,0.9999,insufficient,%s,3.%d\n", sid, week, model, week%3)
					n += int64(k)
				}
			}
		}
	}
	if err := w.Flush(); err != nil {
		t.Fatal(err)
	}
	f.Close()
	return path, participants
}

// peakHeap samples the live heap every few milliseconds while fn runs and
// returns the highest value above the heap before it, in bytes, with the
// process's peak resident set during fn (VmHWM, reset first; 0 where the
// kernel does not offer it).
func peakHeap(fn func()) (heap, rss int64) {
	runtime.GC()
	sample := []metrics.Sample{{Name: "/memory/classes/heap/objects:bytes"}}
	read := func() int64 { metrics.Read(sample); return int64(sample[0].Value.Uint64()) }
	base := read()
	_ = os.WriteFile("/proc/self/clear_refs", []byte("5"), 0) // resets VmHWM to the current RSS
	var peak atomic.Int64
	stop := make(chan struct{})
	var wg sync.WaitGroup
	wg.Add(1)
	go func() {
		defer wg.Done()
		t := time.NewTicker(2 * time.Millisecond)
		defer t.Stop()
		for {
			if v := read() - base; v > peak.Load() {
				peak.Store(v)
			}
			select {
			case <-stop:
				return
			case <-t.C:
			}
		}
	}()
	fn()
	close(stop)
	wg.Wait()
	if b, err := os.ReadFile("/proc/self/status"); err == nil {
		for _, l := range strings.Split(string(b), "\n") {
			if f := strings.Fields(l); len(f) >= 2 && f[0] == "VmHWM:" {
				kb, _ := strconv.ParseInt(f[1], 10, 64)
				rss = kb << 10
			}
		}
	}
	return peak.Load(), rss
}

// TestVerdictImportMemoryIsBounded imports a verdicts file of several MB
// (flag -verdict-mem-mb; 8 by default) and checks that the heap the import
// holds at its peak stays below the file's own size: the file streams
// through the store instead of being held row by row. It logs the peak heap
// and the peak resident set for the README.
func TestVerdictImportMemoryIsBounded(t *testing.T) {
	s := newStore(t)
	ctx := context.Background()
	path, participants := writeVerdictFile(t, *verdictMemMB)
	if _, err := s.Pool().Exec(ctx, `INSERT INTO sites (code, name) VALUES ('VM', 'Memory site') ON CONFLICT DO NOTHING`); err != nil {
		t.Fatal(err)
	}
	if _, err := s.Pool().Exec(ctx, `INSERT INTO participants (study_id, site_id, time_zone, enrolled_on)
		SELECT 'VM-' || lpad(g::text, 5, '0'), (SELECT id FROM sites WHERE code = 'VM'), 'UTC', date '2025-01-06' FROM generate_series(0, $1 - 1) g`, participants); err != nil {
		t.Fatal(err)
	}
	st, err := os.Stat(path)
	if err != nil {
		t.Fatal(err)
	}
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	var res db.VerdictImport
	start := time.Now()
	heap, rss := peakHeap(func() {
		res, err = s.ImportVerdicts(ctx, cohort.Actor{Name: "memory test", Role: cohort.Coordinator}, "verdicts.csv", f)
	})
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("%.1f MB file, %d lines (%s) in %s: peak heap above the start %.1f MB, peak RSS of the test process %.1f MB",
		float64(st.Size())/(1<<20), res.Rows, res.Summary(), time.Since(start).Round(time.Millisecond), float64(heap)/(1<<20), float64(rss)/(1<<20))
	if res.Added == 0 || res.Rejected == 0 || res.Duplicates != 0 {
		t.Fatalf("import: %s", res.Summary())
	}
	if heap > st.Size() {
		t.Errorf("the import held %.1f MB of heap for a %.1f MB file: it does not stream", float64(heap)/(1<<20), float64(st.Size())/(1<<20))
	}
}
