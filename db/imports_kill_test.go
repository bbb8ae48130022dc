package db_test

import (
	"context"
	"io"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/db"
	"cohortdesk/db/dbtest"
)

const childEnv = "COHORTDESK_IMPORT_CHILD"

// slowReader hands out the file slowly so the parent can kill the importing
// process in the middle, after several partial flushes.
type slowReader struct{ r io.Reader }

func (s slowReader) Read(p []byte) (int, error) {
	if len(p) > 2048 {
		p = p[:2048]
	}
	time.Sleep(5 * time.Millisecond)
	return s.r.Read(p)
}

// TestImportChildProcess is the process the kill test starts and kills; it
// does nothing in a normal run.
func TestImportChildProcess(t *testing.T) {
	if os.Getenv(childEnv) == "" {
		return
	}
	ctx := context.Background()
	pool, err := db.Open(ctx, os.Getenv("DATABASE_URL"), 2)
	if err != nil {
		t.Fatal(err)
	}
	f, err := os.Open(os.Getenv("IMPORT_FILE"))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	_, err = db.New(pool, nil).ImportReadings(ctx, cohort.System, slowReader{f}, db.ImportOptions{Kind: db.ImportReadingsCSV, FileName: "big.csv", Budget: 16 << 10})
	t.Fatalf("the import finished (%v) before it was killed", err)
}

// TestImportKilledMidwayLeavesNothing kills (SIGKILL) a process in the middle
// of an import: the database keeps nothing of the file, the import is later
// marked interrupted, and importing the file again works and stores it once.
func TestImportKilledMidwayLeavesNothing(t *testing.T) {
	url := dbtest.URL(t)
	ctx := context.Background()
	pool, err := db.Open(ctx, url, 4)
	if err != nil {
		t.Fatal(err)
	}
	defer pool.Close()
	s := db.New(pool, nil)
	seedTwo(t, s)
	body := readingsCSV([]string{"P-1", "P-2"}, 20000, 0)
	path := filepath.Join(t.TempDir(), "big.csv")
	if err := os.WriteFile(path, []byte(body), 0o644); err != nil {
		t.Fatal(err)
	}
	cmd := exec.Command(os.Args[0], "-test.run=^TestImportChildProcess$", "-test.count=1")
	cmd.Env = append(os.Environ(), childEnv+"=1", "DATABASE_URL="+url, "IMPORT_FILE="+path)
	var out strings.Builder
	cmd.Stdout, cmd.Stderr = &out, &out
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	// Wait until the child has read a good part of the file (its heartbeat
	// reports progress once a second), then kill it without warning.
	deadline := time.Now().Add(60 * time.Second)
	for {
		var read int64
		_ = pool.QueryRow(ctx, `SELECT coalesce(max(bytes_read), 0) FROM imports WHERE status = 'running'`).Scan(&read)
		if read > int64(len(body))/4 {
			break
		}
		if time.Now().After(deadline) {
			cmd.Process.Kill()
			t.Fatalf("the child never got going:\n%s", out.String())
		}
		time.Sleep(50 * time.Millisecond)
	}
	if err := cmd.Process.Signal(syscall.SIGKILL); err != nil {
		t.Fatal(err)
	}
	_ = cmd.Wait()

	// The server aborts the dead client's transaction; wait for its backend to go.
	for i := 0; i < 100; i++ {
		var n int
		_ = pool.QueryRow(ctx, `SELECT count(*) FROM pg_stat_activity WHERE datname = current_database() AND state LIKE 'idle in transaction%'`).Scan(&n)
		if n == 0 {
			break
		}
		time.Sleep(50 * time.Millisecond)
	}
	if n := storedReadings(t, s); n != 0 {
		t.Fatalf("%d readings of a killed import are stored", n)
	}
	var rejects int
	_ = pool.QueryRow(ctx, `SELECT count(*) FROM import_rejects`).Scan(&rejects)
	if rejects != 0 {
		t.Fatalf("%d quarantined rows of a killed import are stored", rejects)
	}
	// Two minutes without a heartbeat make the import "interrupted".
	if _, err := pool.Exec(ctx, `UPDATE imports SET heartbeat_at = now() - interval '3 minutes' WHERE status = 'running'`); err != nil {
		t.Fatal(err)
	}
	if n, err := s.MarkInterruptedImports(ctx); err != nil || n != 1 {
		t.Fatalf("marked %d interrupted (err %v), want 1", n, err)
	}
	// The same file imports in full afterwards, once.
	f, _ := os.Open(path)
	defer f.Close()
	rep, err := s.ImportReadings(ctx, cohort.System, f, db.ImportOptions{Kind: db.ImportReadingsCSV, FileName: "big.csv"})
	if err != nil {
		t.Fatal(err)
	}
	want := int64(2*20000 + 2*1667)
	if rep.Accepted != want || storedReadings(t, s) != want {
		t.Fatalf("after the kill, import stored %d (report %d), want %d", storedReadings(t, s), rep.Accepted, want)
	}
}
