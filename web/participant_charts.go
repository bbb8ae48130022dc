package web

import (
	"fmt"
	"math"
	"net/http"
	"strconv"
	"time"

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
		tc, note, sc, err := trendChart(results, pv, wi)
		if err != nil {
			return err
		}
		m.TrendChart, m.TrendNote, scripts = &tc, note, append(scripts, sc...)
	}
	// The "why" of each week in plain words (screen.Explain), from the
	// results of the active version, with the verdict stored beside them.
	why := map[int]string{}
	for _, res := range results {
		r := res.Result
		r.Verdict = screen.Verdict(res.Verdict)
		why[res.Week] = screen.Explain(r, pv.Params)
	}
	for i := range m.Timeline {
		if w, ok := why[m.Timeline[i].Week]; ok {
			m.Timeline[i].Reason = w
		}
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
		hc, sc, n, err := hrChart(&wk, pv.Params, wi, threshold, s.now().UnixMilli(), disclosureOf(r), p.Location())
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
// windows were irregular. The axis is the disclosure's: for roles that see
// dates, the participant's own time (loc), whatever zone the viewer's
// browser is in (each instant drawn at its wall-clock time in loc, on an
// axis the chart reads as UTC, which says whose time it is); study days for
// a role that sees no dates (the chart's data then holds no timestamp).
func hrChart(w *cohort.Week, p screen.Protocol, wi int, threshold float64, now int64, d disclosure, loc *time.Location) (components.ChartModel, []string, int, error) {
	cleaned, _ := screen.Clean(w, p, now)
	pr := screen.Prepare(&cleaned, p)
	x, xAxis := d.timeAxis(w.Week, cleaned.Start, cleaned.End, loc)
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
		// One series, named by the chart's heading: no legend to sit on the
		// zoom control below the axis.
		charts.WithLegendOpts(opts.Legend{Show: opts.Bool(false)}),
		charts.WithGridOpts(opts.Grid{Bottom: "90"}),
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
	c, sc, err := chartView("hr-chart", label, wallClock{line}, true)
	return c, sc, irregular, err
}

// trendChart draws what decided each week's flag under window size wi: the
// longest run of irregular windows against the run that flags a week, and
// the share of usable windows that were irregular against the share that
// flags one, on axes scaled to the figures (a share of a few percent is not
// drawn flat on a 0-100 scale). Flagged weeks are drawn in the alarm colour
// and named in the legend; a week flagged by another window size or by the
// beat intervals is marked too, since the verdict is the week's.
func trendChart(results []db.StoredResult, pv db.ProtocolVersion, wi int) (components.ChartModel, string, []string, error) {
	var rule screen.WindowRule
	if wi < len(pv.Params.Windows) {
		rule = pv.Params.Windows[wi]
	}
	var x []string
	// The run bars, one series per stored verdict, so each week's bar is
	// drawn in its verdict's colour.
	verdicts := []screen.Verdict{screen.Positive, screen.Negative, screen.Insufficient}
	runs := make([][]opts.BarData, len(verdicts))
	var shareLine, runLimitLine, shareLimitLine []opts.LineData
	maxRun, maxShare := float64(rule.RunLength), 100*rule.MinShare
	flagged := 0
	for _, r := range results {
		x = append(x, "week "+strconv.Itoa(r.Week))
		run, sh := opts.BarData{Value: "-"}, opts.LineData{Value: "-"}
		if len(r.Result.Windows) > wi && r.Result.Windows[wi].Usable > 0 {
			wr := r.Result.Windows[wi]
			run = opts.BarData{Value: wr.LongestRun}
			sh = opts.LineData{Value: math.Round(wr.Share*1000) / 10}
			maxRun, maxShare = math.Max(maxRun, float64(wr.LongestRun)), math.Max(maxShare, 100*wr.Share)
		}
		if screen.Verdict(r.Verdict) == screen.Positive {
			flagged++
		}
		for i, v := range verdicts {
			if screen.Verdict(r.Verdict) == v {
				runs[i] = append(runs[i], run)
			} else {
				runs[i] = append(runs[i], opts.BarData{Value: "-"})
			}
		}
		shareLine = append(shareLine, sh)
		runLimitLine = append(runLimitLine, opts.LineData{Value: rule.RunLength})
		shareLimitLine = append(shareLimitLine, opts.LineData{Value: math.Round(rule.MinShare*1000) / 10})
	}
	size := fmt.Sprintf("%d-minute", rule.Minutes)
	bar := charts.NewBar()
	bar.SetGlobalOptions(
		charts.WithInitializationOpts(chartInit("trend-chart")),
		charts.WithAnimation(false),
		charts.WithTooltipOpts(opts.Tooltip{Show: opts.Bool(true), Trigger: "axis"}),
		charts.WithLegendOpts(opts.Legend{Show: opts.Bool(true), Top: "0"}),
		charts.WithGridOpts(opts.Grid{Top: "70"}),
		charts.WithYAxisOpts(opts.YAxis{Name: "windows in a row", Type: "value", Min: 0, Max: math.Ceil(maxRun * 1.25), MinInterval: 1}),
	)
	bar.ExtendYAxis(opts.YAxis{Name: "% of usable windows", Type: "value", Min: 0, Max: niceCeil(maxShare * 1.25), Position: "right"})
	stack := []charts.SeriesOpts{charts.WithBarChartOpts(opts.BarChart{Stack: "run"})}
	too := chartToken("ink-soft")
	bar.SetXAxis(x).
		AddSeries("longest irregular run, week flagged", runs[0], with(stack, paint(chartPositive))...).
		AddSeries("longest irregular run, negative week", runs[1], with(stack, paint(chartNegative))...).
		AddSeries("longest irregular run, too little data", runs[2], with(stack, []charts.SeriesOpts{charts.WithItemStyleOpts(opts.ItemStyle{Color: too, BorderColor: too})})...)
	line := charts.NewLine()
	line.SetXAxis(x)
	if rule.RunLength > 0 {
		line.AddSeries(fmt.Sprintf("run that flags a week (%d)", rule.RunLength), runLimitLine,
			with(paint(chartThreshold), []charts.SeriesOpts{charts.WithLineChartOpts(opts.LineChart{ShowSymbol: opts.Bool(false)})})...)
	}
	line.AddSeries("irregular share (%)", shareLine, with(paint(chartMeasure), []charts.SeriesOpts{charts.WithLineChartOpts(opts.LineChart{YAxisIndex: 1})})...)
	if rule.MinShare > 0 {
		line.AddSeries(fmt.Sprintf("share that flags a week (%s%%)", strconv.FormatFloat(100*rule.MinShare, 'g', -1, 64)), shareLimitLine,
			charts.WithLineChartOpts(opts.LineChart{YAxisIndex: 1, ShowSymbol: opts.Bool(false)}),
			charts.WithLineStyleOpts(opts.LineStyle{Type: "dotted", Width: 1.5, Color: chartColour(chartThreshold)}),
			charts.WithItemStyleOpts(opts.ItemStyle{Color: chartColour(chartThreshold), BorderColor: chartColour(chartThreshold)}))
	}
	bar.Overlap(line)
	note := fmt.Sprintf("Each week's %s windows under %s: the bars are the longest run of irregular windows in a row, red when the week was flagged; "+
		"the line is the share of usable windows that were irregular. A week is flagged when its run or its share reaches the dashed limits "+
		"(or by another window size or the beat intervals, when the watch supplies them). %s of %d weeks flagged.",
		size, pv.Label(), strconv.Itoa(flagged), len(results))
	c, sc, err := chartView("trend-chart", fmt.Sprintf("What decided each week's flag under %s: longest run and share of irregular %s windows against their limits, flagged weeks in red", pv.Label(), size), bar, false)
	return c, note, sc, err
}

// niceCeil rounds a positive axis end up to 1, 2 or 5 times a power of ten.
func niceCeil(v float64) float64 {
	if v <= 0 {
		return 1
	}
	p := math.Pow(10, math.Floor(math.Log10(v)))
	for _, m := range []float64{1, 2, 5, 10} {
		if m*p >= v {
			return m * p
		}
	}
	return 10 * p
}

// wallClock has the chart library read its time axis as UTC: the values are
// wall-clock times of one zone (see hrChart), drawn as they are.
type wallClock struct{ echartsChart }

func (w wallClock) JSON() map[string]interface{} {
	m := w.echartsChart.JSON()
	m["useUTC"] = true
	return m
}
