package main

import (
	"bytes"
	"context"
	"os"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/db"
	"cohortdesk/db/dbtest"
)

func TestMain(m *testing.M) {
	if os.Getenv(serveChildEnv) != "" {
		os.Exit(m.Run()) // a server child of the kill test: the parent owns the database
	}
	dbtest.Main(m)
}

func TestScreenCommand(t *testing.T) {
	url := dbtest.URL(t)
	ctx := context.Background()
	pool, err := db.Open(ctx, url, 4)
	if err != nil {
		t.Fatal(err)
	}
	defer pool.Close()
	enrolled := cohort.Date{Year: 2026, Month: 3, Day: 2}
	pid := dbtest.AddParticipant(t, pool, "CMD-1", enrolled)
	dbtest.PutWearWeek(t, pool, pid, 1, cohort.HeartRate,
		dbtest.SynthHR(5, dbtest.Irregular, dbtest.WeekStart(enrolled, 1), 48, 10*time.Second))
	getenv := func(k string) string {
		if k == "DATABASE_URL" {
			return url
		}
		return ""
	}
	var out, errOut bytes.Buffer
	if err := run(ctx, []string{"screen", "-participant", "CMD-1", "-poll", "20ms"}, getenv, &out, &errOut); err != nil {
		t.Fatalf("screen: %v\n%s", err, errOut.String())
	}
	if got := out.String(); !strings.Contains(got, "job 1 queued: Screen 1 participant with standard v1") ||
		!strings.Contains(got, "job 1 done: 1 of 1 participant-weeks (100%)") || !strings.Contains(got, "1 positive") {
		t.Fatalf("output:\n%s", got)
	}
	// The cautions follow the verdicts, once.
	for _, c := range append([]string{cohort.CautionsHeading}, cohort.Cautions...) {
		if n := strings.Count(out.String(), c); n != 1 {
			t.Errorf("the output holds the caution %q %d times, want once:\n%s", c, n, out.String())
		}
	}
	for _, args := range [][]string{
		{"screen"},
		{"screen", "-all", "-participant", "CMD-1"},
		{"screen", "-participant", "NOBODY"},
		{"screen", "-all", "-protocol", "77"},
	} {
		if err := run(ctx, args, getenv, &out, &errOut); err == nil {
			t.Errorf("%v: no error", args)
		}
	}
}
