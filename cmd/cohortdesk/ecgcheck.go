package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"text/tabwriter"
	"time"

	"cohortdesk/cohort/ecg"
	"cohortdesk/cohort/screen"
)

// runECGCheck runs the beat detector over a folder of annotated WFDB records
// and prints per-record and gross sensitivity and positive predictivity, in
// the manner of the ANSI/AAMI EC57 standard for testing beat detectors, so a
// study can validate the detector on annotated databases it holds.
func runECGCheck(ctx context.Context, e env, args []string) error {
	fs := flag.NewFlagSet("ecg-check", flag.ContinueOnError)
	fs.SetOutput(e.stderr)
	ann := fs.String("ann", "atr", "annotation file extension of the reference beats (RECORD.atr)")
	window := fs.Duration("window", 150*time.Millisecond, "match window: a detected beat this close to a reference beat matches it")
	from := fs.Duration("from", 0, "leave out the start of every record (EC57 excludes 5m as the detector's learning period)")
	signal := fs.String("signal", "", "label of the signal to analyse (default: the ECG lead intake would choose)")
	fs.Usage = func() {
		fmt.Fprintln(e.stderr, "usage: cohortdesk ecg-check [flags] DIR\n\nDIR holds WFDB records: RECORD.hea, its signal files (formats 16 and 212) and RECORD.<ann>.")
		fs.PrintDefaults()
	}
	if err := fs.Parse(args); err != nil {
		return err
	}
	if fs.NArg() != 1 {
		fs.Usage()
		return errors.New("ecg-check: give one folder")
	}
	if *window <= 0 {
		return fmt.Errorf("ecg-check: -window %v: want a positive duration", *window)
	}
	dir := fs.Arg(0)
	headers, err := filepath.Glob(filepath.Join(dir, "*.hea"))
	if err != nil {
		return err
	}
	slices.Sort(headers)
	if len(headers) == 0 {
		return fmt.Errorf("ecg-check: no WFDB header (*.hea) in %s", dir)
	}
	opt := ecg.EvaluateOptions{Window: window.Seconds(), FromSeconds: from.Seconds(), Signal: *signal,
		Params: screen.DefaultProtocol().RRParams()}
	fmt.Fprintf(e.stdout, "Beat detection against the reference annotations (.%s) of %s: match window %v, from %v of each record.\n\n",
		*ann, dir, *window, *from)
	tw := tabwriter.NewWriter(e.stdout, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "record\tsignal\tseconds\tusable s\treference\tdetected\tTP\tFN\tFP\tSe %\t+P %\tpremature\thint\t")
	var gross ecg.Match
	var seSum, ppSum float64
	var n, seN, ppN int
	var skipped []string
	for _, h := range headers {
		if ctx.Err() != nil {
			return ctx.Err()
		}
		ev, err := checkRecord(h, *ann, opt)
		if err != nil {
			skipped = append(skipped, fmt.Sprintf("%s: %v", filepath.Base(h), err))
			continue
		}
		n++
		gross = gross.Add(ev.Match)
		if se := ev.Match.Se(); !math.IsNaN(se) {
			seSum += se
			seN++
		}
		if pp := ev.Match.PPV(); !math.IsNaN(pp) {
			ppSum += pp
			ppN++
		}
		fmt.Fprintf(tw, "%s\t%s\t%.1f\t%.1f\t%d\t%d\t%d\t%d\t%d\t%s\t%s\t%d\t%s\t\n", ev.Record, ev.Signal, ev.Seconds, ev.Usable,
			ev.RefBeats, ev.Detected, ev.Match.TP, ev.Match.FN, ev.Match.FP, pctText(ev.Match.Se()), pctText(ev.Match.PPV()), ev.Premature, ev.Pattern)
	}
	if n > 0 {
		fmt.Fprintf(tw, "gross (%d records)\t\t\t\t%d\t%d\t%d\t%d\t%d\t%s\t%s\t\t\t\n", n, gross.TP+gross.FN, gross.TP+gross.FP,
			gross.TP, gross.FN, gross.FP, pctText(gross.Se()), pctText(gross.PPV()))
		fmt.Fprintf(tw, "average of records\t\t\t\t\t\t\t\t\t%s\t%s\t\t\t\n", pctText(mean(seSum, seN)), pctText(mean(ppSum, ppN)))
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	fmt.Fprintln(e.stdout, "\nSe = TP/(TP+FN), +P = TP/(TP+FP). Gross figures pool the beats of all records; the average weighs records equally.\n"+
		"Beats in stretches the quality check leaves out are not detected and count as missed. The hint is the intake's reading of\n"+
		"the intervals (premature: irregular from premature beats, not AF-like); it is a hint, not a rhythm annotation.")
	for _, s := range skipped {
		fmt.Fprintln(e.stdout, "not compared:", s)
	}
	if n == 0 {
		return errors.New("ecg-check: no record could be compared")
	}
	return nil
}

// checkRecord reads one record with its signal and annotation files and
// compares its beats.
func checkRecord(header, ann string, opt ecg.EvaluateOptions) (ecg.Evaluation, error) {
	dir := filepath.Dir(header)
	hb, err := os.ReadFile(header)
	if err != nil {
		return ecg.Evaluation{}, err
	}
	h, err := ecg.ParseWFDBHeader(filepath.Base(header), hb, nil)
	if err != nil {
		return ecg.Evaluation{}, err
	}
	annPath := filepath.Join(dir, h.Record+"."+ann)
	ab, err := os.ReadFile(annPath)
	if errors.Is(err, os.ErrNotExist) {
		return ecg.Evaluation{}, fmt.Errorf("no reference annotations (%s)", filepath.Base(annPath))
	}
	if err != nil {
		return ecg.Evaluation{}, err
	}
	var files []ecg.File
	seen := map[string]bool{}
	for _, s := range h.Signals {
		if seen[s.FileName] || strings.ContainsAny(s.FileName, `/\`) || s.FileName == "~" {
			continue
		}
		seen[s.FileName] = true
		b, err := readLimited(filepath.Join(dir, s.FileName), 1<<30)
		if errors.Is(err, os.ErrNotExist) {
			continue // ReadWFDB names a missing file the ECG needs
		}
		if err != nil {
			return ecg.Evaluation{}, err
		}
		files = append(files, ecg.File{Name: s.FileName, Data: b})
	}
	rec, err := ecg.ReadWFDB(ecg.File{Name: filepath.Base(header), Data: hb}, files, nil)
	if err != nil {
		return ecg.Evaluation{}, err
	}
	anns, err := ecg.ReadAnnotations(filepath.Base(annPath), ab)
	if err != nil {
		return ecg.Evaluation{}, err
	}
	return ecg.EvaluateRecord(rec, anns, opt)
}

// readLimited reads a file of at most limit bytes.
func readLimited(path string, limit int64) ([]byte, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	b, err := io.ReadAll(io.LimitReader(f, limit+1))
	if err != nil {
		return nil, err
	}
	if int64(len(b)) > limit {
		return nil, fmt.Errorf("%s is larger than %d MiB", filepath.Base(path), limit>>20)
	}
	return b, nil
}

func mean(sum float64, n int) float64 {
	if n == 0 {
		return math.NaN()
	}
	return sum / float64(n)
}

func pctText(v float64) string {
	if math.IsNaN(v) {
		return "-"
	}
	return fmt.Sprintf("%.2f", v)
}
