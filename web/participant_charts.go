package web

import (
	"fmt"
	"math"
	"net/http"
	"strconv"

	"cohortdesk/cohort"
	"cohortdesk/cohort/screen"
	"cohortdesk/db"
	"cohortdesk/views"
	"cohortdesk/views/components"

	"github.com/go-echarts/go-echarts/v2/charts"
	"github.com/go-echarts/go-echarts/v2/opts"
)

// Limits that keep the heart-rate chart light in the page: above maxHRPoints
// readings the week is drawn as means over hrBucket, and at most maxAreas
// stretches of irregular windows are shaded.
const (
	maxHRPoints = 5000
	hrBucketMs  = 2 * 60_000
	maxAreas    = 400
)

// participantCharts fills the screening parts of the participant page: the
// heart rate of the chosen week with irregular windows shaded, the weekly
// screening metrics, and the verdicts of external models (kept apart from
// ours). Everything follows the active protocol version.
func (s *Server) participantCharts(r *http.Request, p db.Participant, sheet db.ParticipantSheet, m *views.ParticipantModel) error {
	ctx := r.Context()
	lines := sheet.Lines
	m.External = externalRows(sheet.External)
	if !sheet.HasProtocol {
		m.ChartNote = "No screening protocol is active yet, so nothing has been screened."
		return nil
	}
	pv, results := sheet.Protocol, sheet.Results
	var scripts []string
	wi := mainWindow(results, pv)
	if len(results) > 0 {
		tc, sc, err := trendChart(results, pv, wi)
		if err != nil {
			return err
		}
		m.TrendChart, scripts = &tc, append(scripts, sc...)
	}
	hasHR := false
	for _, l := range lines {
		hasHR = hasHR || (l.Week == m.ChartWeek && l.HRCount > 0)
	}
	if hasHR && len(pv.Params.Windows) > 0 {
		wk, err := s.store.WearWeek(ctx, p, m.ChartWeek)
		if err != nil {
			return err
		}
		rule := pv.Params.Windows[wi]
		threshold := rule.MASDThreshold
		for _, res := range results {
			if res.Week == m.ChartWeek && len(res.Result.Windows) > wi {
				threshold = res.Result.Windows[wi].Threshold // a personal baseline may have raised it
			}
		}
		hc, sc, n, err := hrChart(&wk, pv.Params, wi, threshold, s.now().UnixMilli(), disclosureOf(r))
		if err != nil {
			return err
		}
		m.HRChart, scripts = &hc, append(scripts, sc...)
		m.ChartNote = fmt.Sprintf("Shaded: %d-minute windows that %s calls irregular (mean absolute successive difference at or above %s bpm); %d such windows this week. ",
			rule.Minutes, pv.Label(), strconv.FormatFloat(threshold, 'g', -1, 64), n)
	} else {
		m.ChartNote = "No heart-rate readings in this week. "
	}
	m.ChartNote += views.IllustrativeNote
	for _, sc := range scripts {
		if !contains(m.Page.Scripts, sc) {
			m.Page.Scripts = append(m.Page.Scripts, sc)
		}
	}
	return nil
}

// mainWindow picks the window size the charts show: the one with the most
// usable windows over the participant's weeks, since a watch that samples every
// few minutes fills no 5-minute window and a chart of those would be empty.
func mainWindow(results []db.StoredResult, pv db.ProtocolVersion) int {
	best, bestUsable := 0, -1
	for i := range pv.Params.Windows {
		usable := 0
		for _, r := range results {
			if len(r.Result.Windows) > i {
				usable += r.Result.Windows[i].Usable
			}
		}
		if usable > bestUsable {
			best, bestUsable = i, usable
		}
	}
	return best
}

func contains(list []string, s string) bool {
	for _, x := range list {
		if x == s {
			return true
		}
	}
	return false
}

// hrChart draws a week's cleaned heart rate on a time axis with the irregular
// windows of the protocol's window size wi shaded, and returns how many
// windows were irregular. The axis is the disclosure's: calendar time, or
// study days for a role that sees no dates (the chart's data then holds no
// timestamp).
func hrChart(w *cohort.Week, p screen.Protocol, wi int, threshold float64, now int64, d disclosure) (components.ChartModel, []string, int, error) {
	cleaned, _ := screen.Clean(w, p, now)
	pr := screen.Prepare(&cleaned, p)
	x, xAxis := d.timeAxis(w.Week, cleaned.Start, cleaned.End)
	rule := p.Windows[wi]
	l := int64(rule.Minutes) * 60_000
	var areas [][]opts.MarkAreaData
	irregular := 0
	runStart := int64(-1)
	closeRun := func(end int64) {
		if runStart >= 0 && len(areas) < maxAreas {
			areas = append(areas, []opts.MarkAreaData{{XAxis: x(runStart)}, {XAxis: x(end)}})
		}
		runStart = -1
	}
	for i, sum := range pr.Summaries(wi) {
		start := cleaned.Start + int64(i)*l
		if rule.Classify(sum, threshold) == screen.WindowIrregular {
			irregular++
			if runStart < 0 {
				runStart = start
			}
			continue
		}
		closeRun(start)
	}
	closeRun(min(cleaned.End, cleaned.Start+int64(len(pr.Summaries(wi)))*l))

	hr := cleaned.HR
	var pts []opts.LineData
	gap := func(t int64) { pts = append(pts, opts.LineData{Value: []any{x(t), "-"}}) }
	if hr.Len() <= maxHRPoints {
		for i, t := range hr.T {
			if i > 0 && t-hr.T[i-1] > 10*60_000 {
				gap(t - 1)
			}
			pts = append(pts, opts.LineData{Value: []any{x(t), hr.V[i]}})
		}
	} else {
		// Means over fixed buckets aligned to the week's start.
		var sum, n int64
		bucket := int64(-1)
		flush := func() {
			if n > 0 {
				t := cleaned.Start + bucket*hrBucketMs + hrBucketMs/2
				pts = append(pts, opts.LineData{Value: []any{x(t), math.Round(float64(sum)/float64(n)*10) / 10}})
			}
		}
		for i, t := range hr.T {
			b := (t - cleaned.Start) / hrBucketMs
			if b != bucket {
				flush()
				if bucket >= 0 && b-bucket > 5 {
					gap(cleaned.Start + (bucket+1)*hrBucketMs)
				}
				bucket, sum, n = b, 0, 0
			}
			sum += int64(hr.V[i])
			n++
		}
		flush()
	}
	line := charts.NewLine()
	line.SetGlobalOptions(
		charts.WithInitializationOpts(chartInit("hr-chart")),
		charts.WithAnimation(false),
		charts.WithTooltipOpts(opts.Tooltip{Show: opts.Bool(true), Trigger: "axis"}),
		charts.WithXAxisOpts(xAxis),
		charts.WithYAxisOpts(opts.YAxis{Name: "bpm", Type: "value", Scale: opts.Bool(true)}),
		charts.WithDataZoomOpts(opts.DataZoom{Type: "inside"}, opts.DataZoom{Type: "slider"}),
	)
	line.AddSeries("Heart rate", pts,
		charts.WithLineChartOpts(opts.LineChart{ShowSymbol: opts.Bool(false)}),
		charts.WithLineStyleOpts(opts.LineStyle{Width: 1, Color: chartColour(chartMeasure)}),
		charts.WithItemStyleOpts(opts.ItemStyle{Color: chartColour(chartMeasure)}),
		charts.WithMarkAreaData(areas...),
		charts.WithMarkAreaStyleOpts(opts.MarkAreaStyle{ItemStyle: &opts.ItemStyle{Color: chartColour(chartPositive), Opacity: opts.Float(0.18)}}),
	)
	label := fmt.Sprintf("Heart rate in study week %d with %d irregular %d-minute windows shaded", w.Week, irregular, rule.Minutes)
	c, sc, err := chartView("hr-chart", label, line, true)
	return c, sc, irregular, err
}

// trendChart draws the weekly figures of window size wi: mean MASD and the
// share of irregular windows, with the threshold for comparison.
func trendChart(results []db.StoredResult, pv db.ProtocolVersion, wi int) (components.ChartModel, []string, error) {
	var x []string
	var masd, share, threshold, pos, neg []opts.LineData
	for _, r := range results {
		// The week's verdict as a mark at the bottom of the share axis.
		mark := func(v screen.Verdict) opts.LineData {
			if screen.Verdict(r.Verdict) == v {
				return opts.LineData{Value: 0}
			}
			return opts.LineData{Value: "-"}
		}
		pos, neg = append(pos, mark(screen.Positive)), append(neg, mark(screen.Negative))
		x = append(x, "week "+strconv.Itoa(r.Week))
		if len(r.Result.Windows) <= wi || r.Result.Windows[wi].Usable == 0 {
			masd = append(masd, opts.LineData{Value: "-"})
			share = append(share, opts.LineData{Value: "-"})
		} else {
			wr := r.Result.Windows[wi]
			masd = append(masd, opts.LineData{Value: math.Round(wr.MeanMASD*100) / 100})
			share = append(share, opts.LineData{Value: math.Round(wr.Share*1000) / 10})
		}
		th := "-"
		if len(r.Result.Windows) > wi {
			th = strconv.FormatFloat(r.Result.Windows[wi].Threshold, 'g', -1, 64)
		}
		threshold = append(threshold, opts.LineData{Value: th})
	}
	minutes := 0
	if len(pv.Params.Windows) > wi {
		minutes = pv.Params.Windows[wi].Minutes
	}
	line := charts.NewLine()
	line.SetGlobalOptions(
		charts.WithInitializationOpts(chartInit("trend-chart")),
		charts.WithAnimation(false),
		charts.WithTooltipOpts(opts.Tooltip{Show: opts.Bool(true), Trigger: "axis"}),
		charts.WithLegendOpts(opts.Legend{Show: opts.Bool(true), Bottom: "0"}),
		charts.WithYAxisOpts(opts.YAxis{Name: "bpm", Type: "value"}),
	)
	line.ExtendYAxis(opts.YAxis{Name: "% irregular", Type: "value", Min: 0, Max: 100, Position: "right"})
	onShare := []charts.SeriesOpts{charts.WithLineChartOpts(opts.LineChart{YAxisIndex: 1})}
	// Verdict marks: a symbol each, no line between them.
	marks := []charts.SeriesOpts{charts.WithLineChartOpts(opts.LineChart{YAxisIndex: 1, ShowSymbol: opts.Bool(true), Symbol: "rect", SymbolSize: 9}),
		charts.WithLineStyleOpts(opts.LineStyle{Opacity: opts.Float(0)})}
	line.SetXAxis(x).
		AddSeries(fmt.Sprintf("Mean MASD, %d-min windows (bpm)", minutes), masd, paint(chartMeasure)...).
		AddSeries("Threshold (bpm)", threshold, paint(chartThreshold)...).
		AddSeries("Irregular windows (%)", share, with(onShare, paint(chartMeasure2))...).
		AddSeries("Screen-positive week", pos, with(paint(chartPositive), marks)...).
		AddSeries("Negative week", neg, with(paint(chartNegative), marks)...)
	return chartView("trend-chart", fmt.Sprintf("Weekly mean MASD and share of irregular windows under %s", pv.Label()), line, false)
}
