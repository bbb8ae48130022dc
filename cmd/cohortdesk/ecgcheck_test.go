package main

import (
	"context"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"

	"cohortdesk/cohort/ecg"
	"cohortdesk/cohort/ecg/ecgtest"
)

// writeRecord writes a WFDB record of a synthetic ECG (McSharry et al. 2003
// model, true R peaks known) into dir, with the true beats as reference
// annotations unless annotate is false.
func writeRecord(t *testing.T, dir, name string, syn ecg.Synthetic, format int, premature []int, annotate bool) {
	t.Helper()
	f, err := ecgtest.ECGWFDB(name, syn, format, premature)
	if err != nil {
		t.Fatal(err)
	}
	must := func(err error) {
		if err != nil {
			t.Fatal(err)
		}
	}
	must(os.WriteFile(filepath.Join(dir, name+".hea"), f.Header, 0o644))
	must(os.WriteFile(filepath.Join(dir, name+".dat"), f.Signal, 0o644))
	if annotate {
		must(os.WriteFile(filepath.Join(dir, name+".atr"), f.Annotations, 0o644))
	}
}

// TestECGCheckCommand runs `cohortdesk ecg-check DIR` over WFDB records the
// test writes: a clean sinus record in format 212 at 360 Hz and a record of
// ventricular bigeminy in format 16 at 500 Hz reproduce every reference beat
// (Se and +P 100%); a record with 6 s of motion noise loses the beats in
// the excluded stretch, which the figures show; a record without
// annotations is listed as not compared. The gross line pools the beats.
func TestECGCheckCommand(t *testing.T) {
	dir := t.TempDir()
	clean, err := ecg.Synthesize(ecgtest.SinusRR(70, 850, 1), ecg.SynthOptions{RateHz: 360, Seed: 1})
	if err != nil {
		t.Fatal(err)
	}
	writeRecord(t, dir, "s100", clean, 212, nil, true)
	e, err := ecgtest.EctopicRR("bigeminy", 60, 800, 2)
	if err != nil {
		t.Fatal(err)
	}
	big, err := ecg.Synthesize(e.RR, ecg.SynthOptions{RateHz: 500, Seed: 2, BeatWaves: e.BeatWaves()})
	if err != nil {
		t.Fatal(err)
	}
	writeRecord(t, dir, "v200", big, 16, e.Premature, true)
	noisy, err := ecg.Synthesize(ecgtest.SinusRR(60, 800, 3), ecg.SynthOptions{RateHz: 360, Seed: 3})
	if err != nil {
		t.Fatal(err)
	}
	noisy.Waveform.Samples = slices.Clone(noisy.Waveform.Samples)
	ecgtest.InjectMotion(&noisy.Waveform, 20, 26, 3, 5)
	writeRecord(t, dir, "n300", noisy, 212, nil, true)
	writeRecord(t, dir, "x400", clean, 212, nil, false)

	var out, errs syncBuffer
	if err := run(context.Background(), []string{"ecg-check", dir}, os.Getenv, &out, &errs); err != nil {
		t.Fatalf("ecg-check: %v\n%s%s", err, out.String(), errs.String())
	}
	text := out.String()
	t.Log("\n" + text)
	rows := map[string][]string{}
	for _, line := range strings.Split(text, "\n") {
		f := strings.Fields(line)
		if len(f) > 0 {
			rows[f[0]] = f
		}
	}
	// record signal seconds usable reference detected TP FN FP Se +P premature hint
	check := func(name string, ref, tp, fn, fp int, se, pp string) {
		t.Helper()
		f := rows[name]
		if len(f) < 11 {
			t.Fatalf("no line for %s", name)
		}
		got := []string{f[4], f[6], f[7], f[8], f[9], f[10]}
		want := []string{strconv.Itoa(ref), strconv.Itoa(tp), strconv.Itoa(fn), strconv.Itoa(fp), se, pp}
		if !slices.Equal(got, want) {
			t.Errorf("%s: reference, TP, FN, FP, Se, +P = %v, want %v", name, got, want)
		}
	}
	check("s100", len(clean.RTimes), len(clean.RTimes), 0, 0, "100.00", "100.00")
	check("v200", len(big.RTimes), len(big.RTimes), 0, 0, "100.00", "100.00")
	if f := rows["v200"]; len(f) < 13 || f[11] != strconv.Itoa(len(e.Premature)) || f[12] != "premature" {
		t.Errorf("v200: premature beats and hint %v, want %d and premature", f, len(e.Premature))
	}
	// The noisy record: no false beat; the beats inside the excluded
	// stretch (about 6-8 of 61) are missed, and the line says so.
	nf := rows["n300"]
	if len(nf) < 11 || nf[8] != "0" || nf[7] == "0" || nf[10] != "100.00" {
		t.Errorf("n300: %v, want FP 0, some FN, +P 100.00", nf)
	}
	fn, _ := strconv.Atoi(nf[7])
	if fn > 9 {
		t.Errorf("n300: %d beats missed, more than the stretch holds", fn)
	}
	if !strings.Contains(text, "not compared: x400.hea: no reference annotations (x400.atr)") {
		t.Errorf("the record without annotations is not reported")
	}
	total := len(clean.RTimes) + len(big.RTimes) + len(noisy.RTimes)
	if g := strings.Fields(strings.SplitN(text[strings.Index(text, "gross"):], "\n", 2)[0]); len(g) < 10 || g[3] != strconv.Itoa(total) || g[7] != "0" {
		t.Errorf("gross line %v, want %d reference beats and no false positive", g, total)
	}
	if err := run(context.Background(), []string{"ecg-check", t.TempDir()}, os.Getenv, &out, &errs); err == nil {
		t.Error("an empty folder: got no error")
	}
}
