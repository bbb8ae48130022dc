package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/db"
)

// runImport imports wear-data files from the command line, one transaction per
// file, and prints each file's report.
func runImport(ctx context.Context, e env, args []string) error {
	fs := flag.NewFlagSet("import", flag.ContinueOnError)
	fs.SetOutput(e.stderr)
	url := fs.String("database-url", e.getenv("DATABASE_URL"), "PostgreSQL URL (env DATABASE_URL)")
	kind := fs.String("format", "auto", "readings (CSV), fhir (R4 Bundle JSON), or auto: by file extension")
	budget := fs.Int("memory-mb", 64, "memory for readings waiting to be written, per file")
	fs.Usage = func() {
		fmt.Fprintln(e.stderr, "usage: cohortdesk import [flags] FILE...")
		fs.PrintDefaults()
	}
	if err := fs.Parse(args); err != nil {
		return err
	}
	if fs.NArg() == 0 {
		fs.Usage()
		return errors.New("import: name at least one file")
	}
	store, closeDB, err := openStore(ctx, e.getenv, "import", *url, 4)
	if err != nil {
		return err
	}
	defer closeDB()
	actor := cohort.Actor{Name: "command line (" + osUser() + ")"}
	failed := 0
	for _, path := range fs.Args() {
		k, err := importKind(*kind, path)
		if err != nil {
			return err
		}
		rep, err := importFile(ctx, store, actor, path, k, *budget<<20)
		printReport(e, path, rep, err)
		if err != nil {
			failed++
			continue
		}
	}
	if failed > 0 {
		return fmt.Errorf("import: %d of %d files refused; nothing from them was stored", failed, fs.NArg())
	}
	return nil
}

func importKind(flagValue, path string) (string, error) {
	switch flagValue {
	case "readings", "csv":
		return db.ImportReadingsCSV, nil
	case "fhir":
		return db.ImportFHIRBundle, nil
	case "auto":
		switch strings.ToLower(filepath.Ext(path)) {
		case ".json":
			return db.ImportFHIRBundle, nil
		case ".csv", ".txt":
			return db.ImportReadingsCSV, nil
		}
		return "", fmt.Errorf("import: cannot tell the format of %s from its extension; use -format readings or -format fhir", path)
	}
	return "", fmt.Errorf("import: -format %q: want readings, fhir or auto", flagValue)
}

func importFile(ctx context.Context, store *db.Store, a cohort.Actor, path, kind string, budget int) (db.ImportReport, error) {
	f, err := os.Open(path)
	if err != nil {
		return db.ImportReport{}, err
	}
	defer f.Close()
	st, _ := f.Stat()
	var size int64
	if st != nil {
		size = st.Size()
	}
	return store.ImportReadings(ctx, a, f, db.ImportOptions{Kind: kind, FileName: filepath.Base(path), Size: size, Budget: budget})
}

func printReport(e env, path string, rep db.ImportReport, err error) {
	if err != nil {
		fmt.Fprintf(e.stdout, "%s: REFUSED, nothing stored: %v\n", path, err)
		return
	}
	dur := time.Duration(0)
	if rep.FinishedAt != nil {
		dur = rep.FinishedAt.Sub(rep.StartedAt)
	}
	fmt.Fprintf(e.stdout, "%s: import #%d done in %s: %d rows, %d new readings stored, %d refused, %d duplicates skipped\n",
		path, rep.ID, dur.Round(time.Millisecond), rep.Rows, rep.Accepted, rep.Rejected, rep.Duplicates)
	for _, rc := range rep.Reasons {
		fmt.Fprintf(e.stdout, "  %-22s %8d  %s\n", rc.Code, rc.Count, rc.Label)
		for _, ex := range rc.Examples {
			fmt.Fprintf(e.stdout, "      line %d: %s\n", ex.Line, ex.Message)
		}
	}
	if rep.Rejected > 0 {
		fmt.Fprintf(e.stdout, "  refused rows are kept; download them from /imports/%d in the app\n", rep.ID)
	}
	if len(rep.Participants) > 0 {
		fmt.Fprintf(e.stdout, "  screening of %d participants is queued; a running server's workers take it\n", len(rep.Participants))
	}
}
