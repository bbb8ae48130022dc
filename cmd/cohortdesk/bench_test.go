package main

import (
	"bytes"
	"context"
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"cohortdesk/web/bench"
)

// TestBenchCommand runs the bench command as the README gives it, at a tiny
// scale, on the private PostgreSQL cluster it starts itself (DATABASE_URL
// unset): it prints the three tables and writes the JSON report. Bad flags
// are refused before anything starts.
func TestBenchCommand(t *testing.T) {
	getenv := func(k string) string {
		if k == "DATABASE_URL" {
			return ""
		}
		return os.Getenv(k)
	}
	out := filepath.Join(t.TempDir(), "bench.json")
	var stdout, stderr bytes.Buffer
	args := []string{"bench", "-participants", "200", "-weeks", "2", "-wear", "4", "-clients", "3", "-duration", "1s", "-out", out}
	if err := run(context.Background(), args, getenv, &stdout, &stderr); err != nil {
		t.Fatalf("bench: %v\n%s", err, stderr.String())
	}
	for _, want := range []string{"cohortdesk importer", "baseline: pgx COPY", "baseline: SQL lag()", "/cases/{id}", "200 participants"} {
		if !strings.Contains(stdout.String(), want) {
			t.Errorf("the output lacks %q:\n%s", want, stdout.String())
		}
	}
	b, err := os.ReadFile(out)
	if err != nil {
		t.Fatal(err)
	}
	var rep bench.Report
	if err := json.Unmarshal(b, &rep); err != nil {
		t.Fatal(err)
	}
	if rep.Import == nil || rep.Screen == nil || len(rep.Pages) == 0 || rep.Scale.Participants != 200 || rep.Pages[0].ServerErrors != 0 {
		t.Errorf("JSON report: %s", b)
	}
	for _, bad := range [][]string{
		{"bench", "-parts", "import,everything"},
		{"bench", "-participants", "10"},
		{"bench", "-wear", "15000"},
		{"bench", "-clients", "0"},
		{"bench", "-duration", "10ms"},
		{"bench", "-pages", "triage,dashboard"},
	} {
		if err := run(context.Background(), bad, getenv, &stdout, &stderr); err == nil {
			t.Errorf("%v: no error", bad)
		}
	}
}
