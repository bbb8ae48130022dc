package web

import (
	"encoding/csv"
	"fmt"
	"math"
	"net/http"
	"net/url"
	"strconv"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/cascade"
	"cohortdesk/cohort/overread"
	"cohortdesk/cohort/screen"
	"cohortdesk/cohort/stats"
	"cohortdesk/db"
	"cohortdesk/views"

	"github.com/go-echarts/go-echarts/v2/charts"
	"github.com/go-echarts/go-echarts/v2/opts"
)

// confirmationsLimit bounds each work list; a study rarely has more waiting.
const confirmationsLimit = 200

// confirmations is the over-read work area. Monitors see counts only:
// the lists name participants' study IDs and dates.
func (s *Server) confirmations(w http.ResponseWriter, r *http.Request) error {
	ctx := r.Context()
	lists, err := s.store.Confirmations(ctx, confirmationsLimit)
	if err != nil {
		return err
	}
	m := views.ConfirmationsModel{Page: s.page(r, "Confirmations", "confirmations"), DeIdentified: !role(r).SeesPHI(),
		UnreadCount: lists.UnreadCount, DisagreedCount: len(lists.Disagreed), CanRead: clinical.allows(role(r))}
	if m.DeIdentified {
		return s.ok(w, r, views.Confirmations(m))
	}
	st, err := s.store.StudySettings(ctx)
	if err != nil {
		return err
	}
	loc := st.Location()
	today := cohort.DateOf(s.now().In(loc))
	day := func(t time.Time) string { return dayOf(t, loc) }
	row := func(q db.QueueRecording) views.QueueRowView {
		return views.QueueRowView{Href: fmt.Sprintf("/recordings/%d", q.ID), CaseHref: fmt.Sprintf("/cases/%d", q.CaseID), StudyID: q.StudyID,
			Site: q.SiteCode, Taken: day(q.TakenAt), Received: day(q.ReceivedAt), Duration: seconds(q.DurationS), TooShort: q.TooShort,
			Auto: q.Auto.Label(), Waiting: cohort.Plural(max(0, today.DaysSince(cohort.DateOf(q.ReceivedAt.In(loc)))), "day")}
	}
	for _, q := range lists.Unread {
		m.Unread = append(m.Unread, row(q))
	}
	for _, q := range lists.Disagreed {
		v := row(q)
		for _, o := range q.Readings {
			switch o.Role {
			case overread.First:
				v.First = o.Rhythm.Label() + " (" + o.Reader + ")"
			case overread.Second:
				v.Second = o.Rhythm.Label() + " (" + o.Reader + ")"
			}
		}
		m.Disagreed = append(m.Disagreed, v)
	}
	for _, o := range lists.Recent {
		m.Recent = append(m.Recent, views.RecentReadingView{Href: fmt.Sprintf("/recordings/%d", o.RecordingID), StudyID: o.StudyID, Site: o.SiteCode,
			Role: o.Role.Label(), Rhythm: o.Rhythm.Label(), Reader: o.Reader, On: o.On.Label(), TooShort: o.TooShort})
	}
	return s.ok(w, r, views.Confirmations(m))
}

// statsFilter reads the statistics page's protocol and site choice (and the
// CSV download's table), strictly.
func statsFilter(v url.Values, sites []db.Site, tables ...string) (cascade.Filter, string, error) {
	q := readQuery(v)
	f := cascade.Filter{ProtocolID: protocolParam(q), SiteID: siteParam(q, "site", sites)}
	table := ""
	if len(tables) > 0 {
		table = q.oneOf("table", tables...)
	}
	return f, table, q.err()
}

func intervalText(iv stats.Interval, n int) string {
	if n == 0 {
		return "—"
	}
	return pct(iv.Lo) + " – " + pct(iv.Hi)
}

func fractionText(f stats.Fraction) string {
	if f.N == 0 {
		return "—"
	}
	return fmt.Sprintf("%d/%d (%s)", f.X, f.N, pct(f.Value()))
}

// medianText words a Kaplan-Meier median and its interval, "not reached"
// where the curve or its band never gets down to one half.
func medianText(m stats.Median) (string, string) {
	day := func(ok bool, v float64) string {
		if !ok {
			return "not reached"
		}
		return strconv.FormatFloat(v, 'f', -1, 64)
	}
	return day(m.Reached, m.Time), day(m.LoReached, m.Lo) + " – " + day(m.HiReached, m.Hi)
}

// groupLabel names a row of the agreement statistics, in the table and on
// the PPV chart alike: "all", "site: DRF".
func groupLabel(g cascade.Group) string {
	if g.Dimension != "all" && g.Dimension != "protocol" {
		return g.Dimension + ": " + g.Label
	}
	return g.Label
}

func statRow(g cascade.Group) views.StatRowView {
	label := groupLabel(g)
	med, ci := "—", "—"
	if g.Flagged > 0 {
		med, ci = medianText(g.Median)
	}
	ppv := "—"
	if g.OverRead > 0 {
		ppv = fmt.Sprintf("%d/%d = %s", g.Confirmed, g.OverRead, pct(g.PPV.Value()))
	}
	return views.StatRowView{Group: label, Flagged: g.Flagged, WithRecording: g.WithRecording, OverRead: g.OverRead, Confirmed: g.Confirmed,
		PPV: ppv, Wilson: intervalText(g.Wilson, g.OverRead), Exact: intervalText(g.Exact, g.OverRead),
		Uninterpretable: fractionText(g.Uninterpretable), Median: med, MedianCI: ci, Censored: g.Censored}
}

// statsCSVHref is the download address of one table with the page's choice.
func statsCSVHref(table string, q url.Values) string {
	v := url.Values{"table": {table}}
	for _, k := range []string{"protocol", "site"} {
		if q.Get(k) != "" {
			v.Set(k, q.Get(k))
		}
	}
	return "/confirmations/statistics.csv?" + v.Encode()
}

// confirmationStats is the agreement statistics page: aggregate,
// de-identified numbers only, so monitors may see it.
func (s *Server) confirmationStats(w http.ResponseWriter, r *http.Request) error {
	ctx := r.Context()
	q := r.URL.Query()
	sites, siteList, err := s.siteOptions(ctx)
	if err != nil {
		return err
	}
	f, _, err := statsFilter(q, siteList)
	if err != nil {
		return err
	}
	a, err := s.store.Agreement(ctx, f)
	if err != nil {
		return err
	}
	pending, err := s.store.Pending(ctx)
	if err != nil {
		return err
	}
	m := views.StatisticsModel{Page: s.page(r, "Agreement statistics", "confirmations"), AsOf: a.AsOf.Label(), Protocol: a.Protocol.Label(), PPVUnits: screen.PPVUnits,
		Freshness: freshness(pending, s.studyZone(ctx)),
		ProtoID:   strconv.Itoa(a.Protocol.ID), Sites: sites, SiteID: q.Get("site"), CSV: map[string]string{}}
	for _, t := range []string{"versions", "groups", "km", "kappa"} {
		m.CSV[t] = statsCSVHref(t, q)
	}
	for _, v := range a.Versions {
		label := v.Label()
		if v.Active {
			label += " (active)"
		}
		m.Protocols = append(m.Protocols, views.Option{Value: strconv.Itoa(v.ID), Label: label})
	}
	for _, g := range a.ByVersion {
		m.ByVersion = append(m.ByVersion, statRow(g))
	}
	for _, g := range a.Groups {
		m.Groups = append(m.Groups, statRow(g))
	}
	for _, st := range a.Curve.Steps {
		m.KM = append(m.KM, views.KMRowView{Day: strconv.FormatFloat(st.Time, 'f', -1, 64), AtRisk: st.AtRisk, Events: st.Events,
			Censored: st.Censored, Survival: pct(st.Survival), Band: pct(st.Lo) + " – " + pct(st.Hi)})
	}
	m.Kappa = kappaView(a.Kappa)

	km, scripts, err := chartView("km", "Kaplan-Meier curve: share of flagged episodes still without an over-read by days since the flag, with its 95% band", kmChart(a.Curve), false)
	if err != nil {
		return err
	}
	m.KMChart, m.Page.Scripts = km, scripts
	if ppv, ok := ppvChart(a.Groups); ok {
		if m.PPVChart, _, err = chartView("ppv", "PPV of the flag by subgroup, each with its 95% Wilson interval", ppv, false); err != nil {
			return err
		}
		m.HasPPV = true
	}
	return s.ok(w, r, views.Statistics(m))
}

func kappaView(k cascade.Kappa) views.KappaView {
	v := views.KappaView{Rows: k.Table, N: k.N, Note: k.Err, Mapping: overread.CategoryMapping}
	for _, c := range k.Categories {
		v.Categories = append(v.Categories, string(c))
	}
	if k.Err == "" {
		f := func(x float64) string { return strconv.FormatFloat(x, 'f', 3, 64) }
		v.Kappa, v.CI, v.Po, v.Pe = f(k.Kappa.Kappa), f(k.CI.Lo)+" – "+f(k.CI.Hi), f(k.Kappa.Po), f(k.Kappa.Pe)
	}
	return v
}

// kmChart draws the Kaplan-Meier estimate as a step line (the curve drops at
// each over-read day and stays flat between), with its pointwise band dashed.
func kmChart(c stats.Curve) *charts.Line {
	line := charts.NewLine()
	line.SetGlobalOptions(charts.WithInitializationOpts(chartInit("km")),
		charts.WithTooltipOpts(opts.Tooltip{Show: opts.Bool(true), Trigger: "axis"}),
		charts.WithLegendOpts(opts.Legend{Show: opts.Bool(true), Bottom: "0"}),
		charts.WithXAxisOpts(opts.XAxis{Type: "value", Name: "days since the flag", Min: 0}),
		charts.WithYAxisOpts(opts.YAxis{Type: "value", Name: "still without an over-read", Min: 0, Max: 1}))
	est := []opts.LineData{{Value: []float64{0, 1}}}
	lo := []opts.LineData{{Value: []float64{0, 1}}}
	hi := []opts.LineData{{Value: []float64{0, 1}}}
	for _, st := range c.Steps {
		est = append(est, opts.LineData{Value: []float64{st.Time, round4(st.Survival)}})
		lo = append(lo, opts.LineData{Value: []float64{st.Time, round4(st.Lo)}})
		hi = append(hi, opts.LineData{Value: []float64{st.Time, round4(st.Hi)}})
	}
	step := []charts.SeriesOpts{charts.WithLineChartOpts(opts.LineChart{Step: "end", ShowSymbol: opts.Bool(false)})}
	line.AddSeries("Kaplan-Meier estimate", est, with(step, paint(chartMeasure))...)
	line.AddSeries("95% band, lower", lo, with(step, paint(chartBand))...)
	line.AddSeries("95% band, upper", hi, with(step, paint(chartBand))...)
	return line
}

func round4(v float64) float64 {
	if math.IsNaN(v) {
		return 0
	}
	return math.Round(v*10000) / 10000
}

// ppvChart draws each subgroup's PPV with its Wilson interval as a box plot
// whose box collapses onto the estimate and whose whiskers are the interval
// (ECharts has no error bars of its own). Groups without an over-read are
// left out; false when none is left.
func ppvChart(groups []cascade.Group) (*charts.BoxPlot, bool) {
	var labels []string
	var data []opts.BoxPlotData
	var points []opts.ScatterData
	for _, g := range groups {
		if g.OverRead == 0 {
			continue
		}
		label := groupLabel(g)
		p := round4(g.PPV.Value())
		labels = append(labels, label)
		data = append(data, opts.BoxPlotData{Name: label, Value: []float64{round4(g.Wilson.Lo), p, p, p, round4(g.Wilson.Hi)}})
		points = append(points, opts.ScatterData{Name: fmt.Sprintf("%s: %d/%d", label, g.Confirmed, g.OverRead), Value: p, Symbol: "diamond", SymbolSize: 12})
	}
	if len(data) == 0 {
		return nil, false
	}
	bp := charts.NewBoxPlot()
	// Every interval is labelled: the axis shows every subgroup's name
	// (interval 0), turned so long names do not collide, with room below.
	bp.SetGlobalOptions(charts.WithInitializationOpts(chartInit("ppv")),
		charts.WithTooltipOpts(opts.Tooltip{Show: opts.Bool(true), Trigger: "item"}),
		charts.WithGridOpts(opts.Grid{Bottom: "110"}),
		charts.WithXAxisOpts(opts.XAxis{AxisLabel: &opts.AxisLabel{Interval: "0", Rotate: 35, HideOverlap: opts.Bool(false)}}),
		charts.WithYAxisOpts(opts.YAxis{Name: "per-episode PPV (95% Wilson interval)", Min: 0, Max: 1}))
	bp.SetXAxis(labels).AddSeries("95% Wilson interval", data,
		charts.WithItemStyleOpts(opts.ItemStyle{Color: "transparent", BorderColor: chartColour(chartBand), BorderWidth: 1.5}))
	est := charts.NewScatter()
	est.SetXAxis(labels).AddSeries("PPV", points, paint(chartMeasure)...)
	bp.Overlap(est)
	return bp, true
}

// confirmationStatsCSV downloads one table of the statistics page: versions,
// groups, km or kappa.
func (s *Server) confirmationStatsCSV(w http.ResponseWriter, r *http.Request) error {
	q := r.URL.Query()
	sites, err := s.store.Sites(r.Context())
	if err != nil {
		return err
	}
	f, table, err := statsFilter(q, sites, "versions", "groups", "km", "kappa")
	if err != nil {
		return err
	}
	if table == "" {
		table = "groups"
	}
	a, err := s.store.Agreement(r.Context(), f)
	if err != nil {
		return err
	}
	if err := s.store.Audit(r.Context(), s.actor(r), "statistics.download", "statistics", table, nil,
		map[string]any{"protocol_id": a.Protocol.ID, "site_id": q.Get("site")}); err != nil {
		return err
	}
	var rows [][]string
	switch table {
	case "versions", "groups":
		rows = append(rows, append([]string{"protocol"}, agreementHeader()...))
		gs := a.Groups
		if table == "versions" {
			gs = a.ByVersion
		}
		for _, g := range gs {
			proto := a.Protocol.Label()
			if table == "versions" {
				proto = g.Label
			}
			rows = append(rows, append([]string{csvSafe(proto)}, agreementRecord(g)...))
		}
	case "km":
		rows = append(rows, []string{"day", "at_risk", "over_read", "censored", "survival", "se", "lo", "hi"})
		for _, st := range a.Curve.Steps {
			rows = append(rows, []string{num(st.Time), strconv.Itoa(st.AtRisk), strconv.Itoa(st.Events), strconv.Itoa(st.Censored),
				num(st.Survival), num(st.SE), num(st.Lo), num(st.Hi)})
		}
	case "kappa":
		head := []string{"recorder \\ over-read"}
		for _, c := range a.Kappa.Categories {
			head = append(head, string(c))
		}
		rows = append(rows, head)
		for i, row := range a.Kappa.Table {
			line := []string{string(a.Kappa.Categories[i])}
			for _, v := range row {
				line = append(line, strconv.Itoa(v))
			}
			rows = append(rows, line)
		}
		if a.Kappa.Err == "" {
			rows = append(rows, []string{"kappa", num(a.Kappa.Kappa.Kappa)}, []string{"kappa_ci_lo", num(a.Kappa.CI.Lo)},
				[]string{"kappa_ci_hi", num(a.Kappa.CI.Hi)}, []string{"n", strconv.Itoa(a.Kappa.N)})
		}
	}
	w.Header().Set("Content-Type", "text/csv; charset=utf-8")
	w.Header().Set("Content-Disposition", fmt.Sprintf(`attachment; filename="agreement-%s-protocol-%d.csv"`, table, a.Protocol.ID))
	cw := csv.NewWriter(w)
	_ = cw.WriteAll(rows)
	return cw.Error()
}
