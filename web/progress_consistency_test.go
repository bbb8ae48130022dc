package web

import (
	"archive/zip"
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/csv"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"net/http"
	"regexp"
	"strconv"
	"strings"
	"testing"

	"cohortdesk/cohort"
	"cohortdesk/cohort/demo"
)

// tableRows reads the body rows of the table with data-testid="id" as the
// text of their cells, keyed by the first cell.
func tableRows(t *testing.T, body, id string) map[string][]string {
	t.Helper()
	s := section(body, id)
	if s == "" {
		t.Fatalf("no table %s", id)
	}
	s = s[:strings.Index(s, "</table>")]
	out := map[string][]string{}
	cell := regexp.MustCompile(`(?s)<t[dh][^>]*>(.*?)</t[dh]>`)
	for _, tr := range regexp.MustCompile(`(?s)<tr[^>]*>(.*?)</tr>`).FindAllStringSubmatch(s, -1) {
		var cells []string
		for _, c := range cell.FindAllStringSubmatch(tr[1], -1) {
			cells = append(cells, squash(stripTags(c[1])))
		}
		if len(cells) > 0 && !strings.Contains(tr[0], "<th") {
			out[cells[0]] = cells
		}
	}
	return out
}

// bundle reads the report's zip: each file's bytes by name.
func bundle(t *testing.T, b []byte) map[string][]byte {
	t.Helper()
	zr, err := zip.NewReader(bytes.NewReader(b), int64(len(b)))
	if err != nil {
		t.Fatalf("report bundle: %v", err)
	}
	out := map[string][]byte{}
	for _, f := range zr.File {
		rc, err := f.Open()
		if err != nil {
			t.Fatal(err)
		}
		out[f.Name], _ = io.ReadAll(rc)
		rc.Close()
	}
	return out
}

// csvRecords reads a CSV file as maps from its header.
func csvRecords(t *testing.T, b []byte) []map[string]string {
	t.Helper()
	recs, err := csv.NewReader(bytes.NewReader(b)).ReadAll()
	if err != nil || len(recs) == 0 {
		t.Fatalf("csv: %v", err)
	}
	var out []map[string]string
	for _, r := range recs[1:] {
		m := map[string]string{}
		for i, h := range recs[0] {
			m[h] = r[i]
		}
		out = append(out, m)
	}
	return out
}

// pctText is how the pages word a fraction (web.pct), for comparing the
// bundle's fractions with the printed page.
func pctText(v string) string {
	f, err := strconv.ParseFloat(v, 64)
	if err != nil {
		return "—"
	}
	return strconv.FormatFloat(100*f, 'f', 1, 64) + "%"
}

// TestReportAgreesWithThePagesOnTheDemo loads the demo study and reads every
// number the progress page, the statistics page, the weekly report and the
// report's CSV bundle share; they must agree one by one. The cascade's
// episode boxes must also be the statistics page's episode counts.
func TestReportAgreesWithThePagesOnTheDemo(t *testing.T) {
	// The clock stands at the demo's own today, so no day can turn between
	// the requests below.
	a := newAppAt(t, demo.DefaultToday())
	loadDemo(t, a, 80)
	// Readings give the agreement figures something to disagree about:
	// every reached case without a recording gets a 45 s recording, and
	// five in six recordings without a reading get one, rhythms and
	// recorder interpretations taken in turn.
	a.exec(`INSERT INTO recordings (case_id, participant_id, taken_at, duration_s, auto_interpretation)
		SELECT c.id, c.participant_id, c.reached_at + interval '3 days', 45, (ARRAY['suggests_af', 'suggests_regular', 'no_reading', 'suggests_af', 'no_call'])[1 + (c.id % 5)::int]
		FROM cases c WHERE c.reached_at IS NOT NULL AND NOT EXISTS (SELECT 1 FROM recordings r WHERE r.case_id = c.id)`)
	a.exec(`INSERT INTO over_reads (recording_id, case_id, participant_id, role, rhythm, reader, read_on)
		SELECT r.id, r.case_id, r.participant_id, 'first', (ARRAY['af', 'sinus', 'af', 'uninterpretable', 'flutter', 'af'])[1 + (r.id % 6)::int],
		       'Reader Two', (r.taken_at + interval '2 days')::date
		FROM recordings r WHERE r.id % 6 <> 5 AND NOT EXISTS (SELECT 1 FROM over_reads o WHERE o.recording_id = r.id)`)
	c := a.signIn(cohort.Investigator)
	get := func(path string) string {
		t.Helper()
		res, body := a.get(c, path)
		if res.StatusCode != http.StatusOK {
			t.Fatalf("%s: status %d", path, res.StatusCode)
		}
		return body
	}
	progress, stats, report := get("/progress"), get("/confirmations/statistics"), get("/progress/report")
	res, zipBody := a.get(c, "/progress/report.zip")
	if res.StatusCode != http.StatusOK || res.Header.Get("Content-Type") != "application/zip" {
		t.Fatalf("bundle: status %d, %s", res.StatusCode, res.Header.Get("Content-Type"))
	}
	files := bundle(t, []byte(zipBody))

	// The manifest lists every other file with its rows and digest.
	var man struct {
		Files []struct {
			Name   string `json:"name"`
			Rows   int    `json:"rows"`
			Bytes  int    `json:"bytes"`
			SHA256 string `json:"sha256"`
		} `json:"files"`
	}
	if err := json.Unmarshal(files["manifest.json"], &man); err != nil {
		t.Fatalf("manifest: %v", err)
	}
	if len(man.Files) != len(files)-1 {
		t.Errorf("manifest lists %d files, the bundle holds %d besides it", len(man.Files), len(files)-1)
	}
	for _, f := range man.Files {
		b, ok := files[f.Name]
		sum := sha256.Sum256(b)
		recs, _ := csv.NewReader(bytes.NewReader(b)).ReadAll()
		if !ok || hex.EncodeToString(sum[:]) != f.SHA256 || len(b) != f.Bytes || (strings.HasSuffix(f.Name, ".csv") && len(recs)-1 != f.Rows) {
			t.Errorf("manifest entry %+v does not match the file (%d bytes, %d rows)", f, len(b), len(recs)-1)
		}
	}
	var audited int
	a.store.Pool().QueryRow(context.Background(), `SELECT count(*) FROM audit_events WHERE action = 'report.download'`).Scan(&audited)
	if audited != 1 {
		t.Errorf("%d audit events for one download", audited)
	}

	// The cascade: the progress page, the report, cascade.csv,
	// cascade_exits.csv and summary.csv.
	boxes := csvRecords(t, files["cascade.csv"])
	if len(boxes) != 8 {
		t.Fatalf("cascade.csv has %d boxes", len(boxes))
	}
	summary := map[string]string{}
	for _, r := range csvRecords(t, files["summary.csv"]) {
		summary[r["figure"]] = r["value"]
	}
	cases := map[string]string{}
	for _, b := range boxes {
		key := b["box"]
		for _, id := range []string{"cascade-count-" + key, "cascade-cases-" + key, "cascade-share-" + key, "cascade-left-" + key, "cascade-waiting-" + key} {
			if p, r := byTestID(progress, id), byTestID(report, id); p != r {
				t.Errorf("%s: progress page %q, report %q", id, p, r)
			}
		}
		if got := byTestID(report, "cascade-count-"+key); got != b["participants"] || got != summary["cascade_"+key] {
			t.Errorf("box %s: report %q, cascade.csv %q, summary.csv %q", key, got, b["participants"], summary["cascade_"+key])
		}
		if got := byTestID(report, "cascade-cases-"+key); got != b["flagged_episodes"] {
			t.Errorf("box %s episodes: report %q, cascade.csv %q", key, got, b["flagged_episodes"])
		}
		cases[key] = b["flagged_episodes"]
	}
	if n, _ := strconv.Atoi(summary["cascade_enrolled"]); n < 40 || byTestID(report, "key-enrolled") != summary["cascade_enrolled"] {
		t.Errorf("enrolled: summary %q, key figure %q", summary["cascade_enrolled"], byTestID(report, "key-enrolled"))
	}
	t.Logf("demo: %s enrolled, %s flagged episodes, %s over-read, %s AF confirmed; %d exits, %d weeks",
		summary["cascade_enrolled"], cases["screen_positive"], cases["over_read"], cases["af_confirmed"], len(csvRecords(t, files["cascade_exits.csv"])), len(csvRecords(t, files["sufficiency.csv"])))
	if n, _ := strconv.Atoi(cases["screen_positive"]); n == 0 {
		t.Fatal("the demo has no flagged episode: the comparison below would be empty")
	}
	exits := csvRecords(t, files["cascade_exits.csv"])
	if len(testIDs(progress, "cascade-exit-")) != len(exits) || len(testIDs(report, "cascade-exit-")) != len(exits) {
		t.Errorf("exits: progress page %d, report %d, cascade_exits.csv %d", len(testIDs(progress, "cascade-exit-")), len(testIDs(report, "cascade-exit-")), len(exits))
	}
	for _, e := range exits {
		id := "cascade-exit-" + e["box"] + "-" + e["reason"]
		if p, r := byTestID(progress, id), byTestID(report, id); p != e["participants"] || r != e["participants"] {
			t.Errorf("%s: progress page %q, report %q, cascade_exits.csv %q", id, p, r, e["participants"])
		}
	}

	// Agreement: the statistics page's subgroup table, the report's table,
	// agreement.csv, and the cascade's episode boxes.
	statRows, reportRows := tableRows(t, stats, "groups-table"), tableRows(t, report, "report-agreement-table")
	all := statRows["all"]
	for i, key := range []string{"screen_positive", "recording_returned", "over_read", "af_confirmed"} {
		if all[1+i] != cases[key] {
			t.Errorf("statistics page column %d = %q, cascade box %s has %q episodes", 1+i, all[1+i], key, cases[key])
		}
	}
	if len(reportRows) < 2 {
		t.Errorf("report agreement rows %v", reportRows)
	}
	for group, row := range reportRows {
		if got := statRows[group]; strings.Join(got, "|") != strings.Join(row, "|") {
			t.Errorf("agreement %s:\n statistics page %q\n report          %q", group, got, row)
		}
	}
	for _, g := range csvRecords(t, files["agreement.csv"]) {
		label := g["group"]
		if g["dimension"] != "all" {
			label = g["dimension"] + ": " + g["group"]
		}
		row, ok := statRows[label]
		if !ok {
			t.Errorf("agreement.csv group %q is not on the statistics page", label)
			continue
		}
		for i, col := range []string{"flagged_episodes", "with_recording", "over_read", "af_confirmed"} {
			if g[col] != row[1+i] {
				t.Errorf("%s %s: agreement.csv %q, statistics page %q", label, col, g[col], row[1+i])
			}
		}
		if g["ppv"] != "" {
			if want := fmt.Sprintf("%s/%s = %s", g["af_confirmed"], g["over_read"], pctText(g["ppv"])); row[5] != want {
				t.Errorf("%s PPV: statistics page %q, agreement.csv gives %q", label, row[5], want)
			}
			if want := pctText(g["wilson_lo"]) + " – " + pctText(g["wilson_hi"]); row[6] != want {
				t.Errorf("%s Wilson: statistics page %q, agreement.csv gives %q", label, row[6], want)
			}
			x, _ := strconv.Atoi(g["af_confirmed"])
			n, _ := strconv.Atoi(g["over_read"])
			if v, _ := strconv.ParseFloat(g["ppv"], 64); math.Abs(v-float64(x)/float64(n)) > 1e-6 {
				t.Errorf("%s: ppv %v is not %d/%d", label, v, x, n)
			}
		}
	}
	kappa := regexp.MustCompile(`kappa (\S+) \(95% CI ([^)]+)\) over (\d+) recordings`)
	ks, kr := kappa.FindStringSubmatch(byTestID(stats, "kappa-value")), kappa.FindStringSubmatch(byTestID(report, "kappa-value"))
	switch {
	case ks == nil && kr == nil:
		if byTestID(stats, "kappa-note") == "" || byTestID(report, "kappa-note") == "" {
			t.Error("neither a kappa nor the reason it is missing")
		}
	case ks == nil || kr == nil || strings.Join(ks[1:], "|") != strings.Join(kr[1:], "|"):
		t.Errorf("kappa: statistics page %q, report %q", ks, kr)
	default:
		if kr[3] != summary["kappa_recordings"] || kr[1] != strconv.FormatFloat(mustFloat(t, summary["kappa"]), 'f', 3, 64) {
			t.Errorf("kappa: report %q, summary.csv %q over %q", kr, summary["kappa"], summary["kappa_recordings"])
		}
	}

	// Enrolment and data sufficiency: the progress page, the report,
	// enrolment.csv and sufficiency.csv.
	for _, e := range csvRecords(t, files["enrolment.csv"]) {
		id := "enrolment-" + e["site"]
		p, r := section(progress, id), section(report, id)
		for _, col := range []string{"target", "enrolled", "withdrawn", "projection", "rate", "range", "percent"} {
			if byTestID(p, col) != byTestID(r, col) {
				t.Errorf("%s %s: progress page %q, report %q", id, col, byTestID(p, col), byTestID(r, col))
			}
		}
		for _, col := range []string{"target", "enrolled", "withdrawn"} {
			if byTestID(r, col) != e[col] {
				t.Errorf("%s %s: report %q, enrolment.csv %q", id, col, byTestID(r, col), e[col])
			}
		}
		if got := byTestID(r, "projection"); got != isoToLabel(e["projected"]) {
			t.Errorf("%s projection: report %q, enrolment.csv %q", id, got, e["projected"])
		}
	}
	weeks := csvRecords(t, files["sufficiency.csv"])
	if len(weeks) == 0 {
		t.Error("no data sufficiency week in the bundle")
	}
	for _, w := range weeks {
		id := "sufficiency-" + w["week_monday"]
		want := isoToLabel(w["week_monday"]) + " " + w["participant_weeks_due"] + " " + w["with_enough_wear"]
		if p, r := byTestID(progress, id), byTestID(report, id); !strings.HasPrefix(p, want) || p != r {
			t.Errorf("%s: progress page %q, report %q, sufficiency.csv %q", id, p, r, want)
		}
	}
}

func mustFloat(t *testing.T, s string) float64 {
	t.Helper()
	f, err := strconv.ParseFloat(s, 64)
	if err != nil {
		t.Fatalf("number %q: %v", s, err)
	}
	return f
}

// isoToLabel writes a file's YYYY-MM-DD day in the date style pages use
// (files keep ISO days, pages the date style); anything else unchanged.
func isoToLabel(v string) string {
	if d, err := cohort.ParseDate(v); err == nil && len(v) == 10 {
		return d.Label()
	}
	return v
}
