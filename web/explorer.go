package web

import (
	"errors"
	"fmt"
	"math"
	"net/http"
	"strconv"
	"strings"

	"cohortdesk/cohort"
	"cohortdesk/cohort/screen"
	"cohortdesk/cohort/stats"
	"cohortdesk/db"
	"cohortdesk/views"
	"cohortdesk/views/components"

	"github.com/go-echarts/go-echarts/v2/charts"
	"github.com/go-echarts/go-echarts/v2/opts"
)

// defaultSweepParam is the parameter the explorer opens with.
const defaultSweepParam = "windows[0].masd_threshold"

// sweepOptions lists the sweepable parameters of p with real window indices.
func sweepOptions(p screen.Protocol) []views.Option {
	var out []views.Option
	for _, sp := range screen.Sweepable {
		if strings.Contains(sp, "windows[i]") {
			for i, w := range p.Windows {
				path := strings.Replace(sp, "windows[i]", "windows["+strconv.Itoa(i)+"]", 1)
				out = append(out, views.Option{Value: path, Label: fmt.Sprintf("%d-minute windows: %s", w.Minutes, paramLabel(path))})
			}
			continue
		}
		out = append(out, views.Option{Value: sp, Label: paramLabel(sp)})
	}
	return out
}

// sweepValues spreads steps values evenly from from to to, rounded to 6
// significant digits (whole numbers for integer parameters), without repeats.
func sweepValues(from, to float64, steps int, integer bool) []float64 {
	var out []float64
	for i := range steps {
		v := from
		if steps > 1 {
			v = from + (to-from)*float64(i)/float64(steps-1)
		}
		if integer {
			v = math.Round(v)
		} else if v != 0 {
			mag := math.Pow(10, 5-math.Floor(math.Log10(math.Abs(v))))
			v = math.Round(v*mag) / mag
		}
		if len(out) == 0 || out[len(out)-1] != v {
			out = append(out, v)
		}
	}
	return out
}

func fractionPct(f stats.Fraction) string {
	if f.N == 0 {
		return "no weeks"
	}
	return fmt.Sprintf("%.0f%% (%d/%d)", 100*f.Value(), f.X, f.N)
}

func ciText(iv *stats.Interval) string {
	if iv == nil {
		return ""
	}
	return fmt.Sprintf("%.0f–%.0f%%", 100*iv.Lo, 100*iv.Hi)
}

// explorer sweeps one parameter of a protocol version on request.
func (s *Server) explorer(w http.ResponseWriter, r *http.Request) error {
	ctx := r.Context()
	q := r.URL.Query()
	m := views.ExplorerModel{Page: s.page(r, "Threshold explorer", "screening"), Errors: map[string]string{}}
	all, err := s.store.Protocols(ctx)
	if err != nil {
		return err
	}
	if len(all) == 0 {
		return s.ok(w, r, views.Explorer(m))
	}
	var pv db.ProtocolVersion
	for _, p := range all {
		m.Protocols = append(m.Protocols, views.Option{Value: strconv.Itoa(p.ID), Label: p.Label() + map[bool]string{true: " (active)"}[p.Active]})
		if p.Active && pv.ID == 0 {
			pv = p
		}
	}
	if pv.ID == 0 {
		pv = all[0]
	}
	if id, err := strconv.Atoi(q.Get("protocol")); err == nil {
		found := false
		for _, p := range all {
			if p.ID == id {
				pv, found = p, true
			}
		}
		if !found {
			m.Errors["protocol"] = "there is no such version; showing " + pv.Label()
		}
	}
	m.ProtocolID = strconv.Itoa(pv.ID)
	m.Params = sweepOptions(pv.Params)
	m.Param = q.Get("param")
	valid := false
	for _, o := range m.Params {
		valid = valid || o.Value == m.Param
	}
	if !valid {
		if m.Param != "" {
			m.Errors["param"] = "choose one of the listed parameters"
		}
		m.Param = defaultSweepParam
	}
	leaves := map[string]paramLeaf{}
	for _, l := range protocolLeaves(pv.Params) {
		leaves[l.Path] = l
	}
	cur := leaves[m.Param]
	curVal, _ := strconv.ParseFloat(cur.Value, 64)
	m.Current = cur.Value
	m.From, m.To, m.Steps = q.Get("from"), q.Get("to"), q.Get("steps")
	if m.From == "" {
		m.From = strconv.FormatFloat(sweepValues(curVal*0.5, 0, 1, cur.Kind == "int")[0], 'g', -1, 64)
	}
	if m.To == "" {
		m.To = strconv.FormatFloat(sweepValues(curVal*1.5, 0, 1, cur.Kind == "int")[0], 'g', -1, 64)
	}
	if m.Steps == "" {
		m.Steps = "11"
	}
	if q.Get("run") == "" || len(m.Errors) > 0 {
		return s.ok(w, r, views.Explorer(m))
	}
	from, ferr := strconv.ParseFloat(strings.TrimSpace(m.From), 64)
	to, terr := strconv.ParseFloat(strings.TrimSpace(m.To), 64)
	steps, serr := strconv.Atoi(strings.TrimSpace(m.Steps))
	if ferr != nil || math.IsNaN(from) || math.IsInf(from, 0) {
		m.Errors["from"] = "enter a number"
	}
	if terr != nil || math.IsNaN(to) || math.IsInf(to, 0) {
		m.Errors["to"] = "enter a number"
	}
	if serr != nil || steps < 1 || steps > db.MaxExploreValues {
		m.Errors["steps"] = fmt.Sprintf("enter a whole number from 1 to %d", db.MaxExploreValues)
	}
	if len(m.Errors) > 0 {
		s.render(w, r, http.StatusUnprocessableEntity, views.Explorer(m))
		return nil
	}
	ex, err := s.store.Explore(ctx, pv.ID, m.Param, sweepValues(from, to, steps, cur.Kind == "int"))
	var ve *cohort.ValidationError
	if errors.As(err, &ve) {
		for k, v := range ve.Fields {
			m.Errors[k] = v
		}
		s.render(w, r, http.StatusUnprocessableEntity, views.Explorer(m))
		return nil
	}
	if err != nil {
		return err
	}
	m.Ran, m.Protocol, m.Weeks = true, pv.Label(), ex.Weeks
	m.Confirmed, m.NotAF, m.Unreadable, m.Pending = ex.ConfirmedWeeks, ex.NotAFWeeks, ex.UninterpretableWeeks, ex.PendingWeeks
	for _, row := range ex.Rows {
		m.Rows = append(m.Rows, views.ExplorerRow{Value: strconv.FormatFloat(row.Value, 'g', -1, 64), Current: row.Value == curVal,
			Flagged: row.Flagged, TP: row.Table.TP, FP: row.Table.FP, FN: row.Table.FN,
			PPV: fractionPct(row.PPV), PPVCI: ciText(row.PPVCI), Sensitivity: fractionPct(row.Sensitivity), SensCI: ciText(row.SensitivityCI)})
	}
	chart, scripts, err := explorerChart(ex)
	if err != nil {
		return err
	}
	m.Chart = &chart
	m.Page.Scripts = append(m.Page.Scripts, scripts...)
	return s.ok(w, r, views.Explorer(m))
}

// explorerChart draws weeks flagged (left axis) and PPV and sensitivity with
// their Wilson intervals as percentages (right axis) against the value.
func explorerChart(ex db.Exploration) (components.ChartModel, []string, error) {
	line := charts.NewLine()
	line.SetGlobalOptions(
		charts.WithInitializationOpts(chartInit("explorer-chart")),
		charts.WithAnimation(false),
		charts.WithTooltipOpts(opts.Tooltip{Show: opts.Bool(true), Trigger: "axis"}),
		charts.WithLegendOpts(opts.Legend{Show: opts.Bool(true), Bottom: "0"}),
		charts.WithXAxisOpts(opts.XAxis{Name: ex.Param, Type: "category", NameLocation: "middle", NameGap: 28}),
		charts.WithYAxisOpts(opts.YAxis{Name: "weeks flagged", Type: "value"}),
	)
	line.ExtendYAxis(opts.YAxis{Name: "%", Type: "value", Min: 0, Max: 100, Position: "right"})
	x := make([]string, len(ex.Rows))
	flagged := make([]opts.LineData, len(ex.Rows))
	var ppv, ppvLo, ppvHi, sens []opts.LineData
	for i, r := range ex.Rows {
		x[i] = strconv.FormatFloat(r.Value, 'g', -1, 64)
		flagged[i] = opts.LineData{Value: r.Flagged}
		ppv = append(ppv, percentPoint(r.PPV.Value()))
		sens = append(sens, percentPoint(r.Sensitivity.Value()))
		if r.PPVCI != nil {
			ppvLo = append(ppvLo, percentPoint(r.PPVCI.Lo))
			ppvHi = append(ppvHi, percentPoint(r.PPVCI.Hi))
		} else {
			ppvLo, ppvHi = append(ppvLo, percentPoint(math.NaN())), append(ppvHi, percentPoint(math.NaN()))
		}
	}
	dashed := charts.WithLineStyleOpts(opts.LineStyle{Type: "dashed", Width: 1})
	right := charts.WithLineChartOpts(opts.LineChart{YAxisIndex: 1})
	line.SetXAxis(x).
		AddSeries("Weeks flagged", flagged).
		AddSeries("PPV %", ppv, right).
		AddSeries("PPV 95% CI, low", ppvLo, right, dashed).
		AddSeries("PPV 95% CI, high", ppvHi, right, dashed).
		AddSeries("Sensitivity %", sens, right)
	return chartView("explorer-chart", "Weeks flagged, PPV and sensitivity for each value of "+ex.Param, line, true)
}

// percentPoint is a percentage, or a gap in the line when there is no value.
func percentPoint(f float64) opts.LineData {
	if math.IsNaN(f) {
		return opts.LineData{Value: "-"}
	}
	return opts.LineData{Value: math.Round(f*1000) / 10}
}
