package bench

import (
	"fmt"
	"io"
	"math"
	"slices"
	"strings"
	"text/tabwriter"
	"time"
)

// Latency summarises samples in milliseconds.
type Latency struct {
	N    int     `json:"n"`
	P50  float64 `json:"p50"`
	P95  float64 `json:"p95"`
	P99  float64 `json:"p99"`
	Max  float64 `json:"max"`
	Mean float64 `json:"mean"`
}

// latency sorts the samples and takes nearest-rank percentiles: the p-th
// percentile is the smallest sample with at least p% of the samples at or
// below it (the nearest-rank definition, common practice).
func latency(samples []time.Duration) Latency {
	if len(samples) == 0 {
		return Latency{}
	}
	s := slices.Clone(samples)
	slices.Sort(s)
	ms := func(d time.Duration) float64 { return float64(d.Microseconds()) / 1000 }
	rank := func(p float64) float64 {
		i := int(math.Ceil(p*float64(len(s)))) - 1
		return ms(s[max(i, 0)])
	}
	var sum time.Duration
	for _, d := range s {
		sum += d
	}
	return Latency{N: len(s), P50: rank(0.50), P95: rank(0.95), P99: rank(0.99), Max: ms(s[len(s)-1]), Mean: ms(sum / time.Duration(len(s)))}
}

// group formats n with thousands separators.
func group(n float64) string {
	s := fmt.Sprintf("%.0f", n)
	neg := strings.HasPrefix(s, "-")
	s = strings.TrimPrefix(s, "-")
	var b strings.Builder
	for i, r := range s {
		if i > 0 && (len(s)-i)%3 == 0 {
			b.WriteByte(',')
		}
		b.WriteRune(r)
	}
	if neg {
		return "-" + b.String()
	}
	return b.String()
}

// WriteTable prints the report as plain-text tables.
func (r Report) WriteTable(w io.Writer) error {
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	p := func(format string, args ...any) { fmt.Fprintf(tw, format, args...) }
	p("cohortdesk bench: %s participants, %d weeks, %d with generated wear data (%s readings in %d participant-weeks), a sparse week for %d others, %d cases (%d being worked)\n",
		group(float64(r.Scale.Participants)), r.Scale.Weeks, r.Scale.WearParticipants, group(float64(r.Scale.Readings)), r.Scale.WearWeeks,
		r.Scale.SparseWeeks, r.Scale.Cases, r.Scale.WorkingCases)
	p("%d CPUs, %s/%s, %s, PostgreSQL %s\n", r.Machine.CPUs, r.Machine.OS, r.Machine.Arch, r.Machine.Go, r.Machine.PostgreSQL)
	p("synthetic cohort built in %.1f s; whole run %.0f s\n\n", r.Build, r.Seconds)
	if im := r.Import; im != nil {
		p("Import of a readings CSV (%.0f MB)\treadings/s\tseconds\tbytes/reading on disk\t\n", float64(im.FileBytes)/1e6)
		p("cohortdesk importer\t%s\t%.1f\t%.1f\t\n", group(im.Ours.ReadingsPerSecond), im.Ours.Seconds, im.OursBytesPerReading)
		p("baseline: pgx COPY of the parsed rows, no index\t%s\t%.1f\t%.1f\t\n", group(im.Copy.ReadingsPerSecond), im.Copy.Seconds, im.CopyBytesPerReading)
		p("ratio (importer / COPY)\t%.2fx\t\t%.3fx\t\n\n", im.Ratio, im.OursBytesPerReading/im.CopyBytesPerReading)
	}
	if sc := r.Screen; sc != nil {
		p("Per-week MASD of heart rate (%s readings, %d weeks; median of %d alternating rounds)\treadings/s\tseconds\t\n", group(float64(sc.HRReadings)), sc.Weeks, masdRounds)
		p("cohortdesk: compact weeks read and decoded, Go\t%s\t%.2f\t\n", group(sc.MASDOurs.ReadingsPerSecond), sc.MASDOurs.Seconds)
		p("baseline: SQL lag() window over one row per reading\t%s\t%.2f\t\n", group(sc.MASDSQL.ReadingsPerSecond), sc.MASDSQL.Seconds)
		p("ratio (Go / SQL); largest relative difference %.1g\t%.2fx\t\t\n", sc.MaxRelDiff, sc.Ratio)
		p("full screen, all readings, results stored (%d positive weeks)\t%s\t%.1f\t\n\n", sc.Positive, group(sc.Full.ReadingsPerSecond), sc.Full.Seconds)
	}
	if r.Figures > 0 {
		p("Kept figures of every participant computed from scratch in %.1f s\n\n", r.Figures)
	}
	for _, pg := range r.Pages {
		p("Pages: %d signed-in clients for %.0f s over loopback, %d database connections: %s requests (%s/s, %.1f/s per CPU), %d server errors, %d other answers, %d without an answer\n",
			pg.Clients, pg.Seconds, pg.MaxConns, group(float64(pg.Requests)), group(pg.RequestsPerSecond), pg.PerCPU, pg.ServerErrors, pg.OtherStatus, pg.TransportErrors)
		p("page\trequests\tserver p50 ms\tp95\tp99\tclient p99\tstore calls\tin the database p50 ms\tp95\t\n")
		for _, pr := range pg.Pages {
			p("%s\t%d\t%.1f\t%.1f\t%.1f\t%.1f\t%.1f\t%.1f\t%.1f\t\n", pr.Path, pr.Requests, pr.Server.P50, pr.Server.P95, pr.Server.P99,
				pr.Client.P99, pr.Calls, pr.DB.P50, pr.DB.P95)
		}
		p("\n")
	}
	return tw.Flush()
}
