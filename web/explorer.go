package web

import (
	"fmt"
	"maps"
	"math"
	"net/http"
	"net/url"
	"strconv"
	"strings"

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

// explorerRecent is how many earlier sweeps the explorer lists.
const explorerRecent = 10

// explorerSetup fills the form part of the model from the chosen protocol
// version, parameter and range (q: the query, the submitted form, or a
// stored sweep's choices) and returns the version and the parameter's
// current value. ok is false when there is no protocol at all.
func (s *Server) explorerSetup(r *http.Request, q url.Values, m *views.ExplorerModel) (pv db.ProtocolVersion, cur paramLeaf, ok bool, err error) {
	all, err := s.store.Protocols(r.Context())
	if err != nil || len(all) == 0 {
		return pv, cur, false, err
	}
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
	cur = leaves[m.Param]
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
	return pv, cur, true, nil
}

// explorerModel is the explorer page with the list of earlier sweeps.
func (s *Server) explorerModel(r *http.Request) (views.ExplorerModel, error) {
	m := views.ExplorerModel{Page: s.page(r, "Threshold explorer", "screening"), Errors: map[string]string{}}
	runs, err := s.store.Explorations(r.Context(), explorerRecent)
	if err != nil {
		return m, err
	}
	for _, run := range runs {
		m.Recent = append(m.Recent, views.ExplorerRunRow{Href: fmt.Sprintf("/explorer?run=%d", run.ID), ID: strconv.FormatInt(run.ID, 10),
			When: run.CreatedAt.UTC().Format("2006-01-02 15:04 UTC"), By: run.CreatedBy, Param: paramLabel(run.Param),
			Values: strconv.Itoa(len(run.Values)), State: run.Job.State, Tone: components.Tone(statusTone(run.Job.State))})
	}
	return m, nil
}

// explorer shows the sweep form, the earlier sweeps and, with ?run=, one
// sweep: its progress while the job runs, its chart and table once done.
// Polled by htmx while the job runs, it answers 204 until the job has ended
// and then asks for a full reload (the chart needs its script).
func (s *Server) explorer(w http.ResponseWriter, r *http.Request) error {
	q := r.URL.Query()
	if q.Get("run") == "" {
		m, err := s.explorerModel(r)
		if err != nil {
			return err
		}
		if _, _, _, err := s.explorerSetup(r, q, &m); err != nil {
			return err
		}
		return s.ok(w, r, views.Explorer(m))
	}
	id, err := strconv.ParseInt(q.Get("run"), 10, 64)
	if err != nil {
		return errNotFound
	}
	run, err := s.store.Exploration(r.Context(), id)
	if err != nil {
		return err
	}
	ended := run.Job.State == db.JobDone || run.Job.State == db.JobFailed
	if r.Header.Get("HX-Request") == "true" {
		if ended {
			w.Header().Set("HX-Refresh", "true")
		}
		w.WriteHeader(http.StatusNoContent)
		return nil
	}
	m, err := s.explorerModel(r)
	if err != nil {
		return err
	}
	choice := url.Values{"protocol": {strconv.Itoa(run.ProtocolID)}, "param": {run.Param}, "steps": {strconv.Itoa(len(run.Values))}}
	if len(run.Values) > 0 {
		choice.Set("from", strconv.FormatFloat(run.Values[0], 'g', -1, 64))
		choice.Set("to", strconv.FormatFloat(run.Values[len(run.Values)-1], 'g', -1, 64))
	}
	_, cur, _, err := s.explorerSetup(r, choice, &m)
	if err != nil {
		return err
	}
	m.Run = &views.ExplorerRun{ID: strconv.FormatInt(run.ID, 10), Href: fmt.Sprintf("/explorer?run=%d", run.ID), State: run.Job.State,
		Tone: components.Tone(statusTone(run.Job.State)), By: run.CreatedBy, Error: run.Job.Error,
		Progress: fmt.Sprintf("%d of %d participant-weeks swept so far", run.Job.Done, run.Job.Total)}
	if run.Job.Total == 0 {
		m.Run.Progress = "not started yet"
	}
	if run.Result == nil {
		return s.ok(w, r, views.Explorer(m))
	}
	ex := *run.Result
	curVal, _ := strconv.ParseFloat(cur.Value, 64)
	m.Ran, m.Protocol, m.Weeks = true, ex.Protocol.Label(), ex.Weeks
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

// explorerStart checks a submitted sweep, queues it and opens it.
func (s *Server) explorerStart(w http.ResponseWriter, r *http.Request) error {
	if err := r.ParseForm(); err != nil {
		return err
	}
	m, err := s.explorerModel(r)
	if err != nil {
		return err
	}
	pv, cur, ok, err := s.explorerSetup(r, r.PostForm, &m)
	if err != nil {
		return err
	}
	if !ok {
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
	id, err := s.store.StartExploration(r.Context(), s.actor(r), pv.ID, m.Param, sweepValues(from, to, steps, cur.Kind == "int"))
	if err != nil {
		f, ok := refused(r, err, nil)
		if !ok {
			return err
		}
		maps.Copy(m.Errors, f.Fields)
		s.render(w, r, f.Status, views.Explorer(m))
		return nil
	}
	http.Redirect(w, r, fmt.Sprintf("/explorer?run=%d", id), http.StatusSeeOther)
	return nil
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
