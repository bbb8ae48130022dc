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

// defaultSweepParam is the parameter the sweep page opens with: the MASD
// threshold of the window size whose criteria decided the version's flags
// (db.DecidingWindow), since a threshold of a size that decides nothing
// changes nothing over any range.
func defaultSweepParam(window int) string { return fmt.Sprintf("windows[%d].masd_threshold", window) }

// sweepRecent is how many earlier sweeps the page lists.
const sweepRecent = 10

// sweepChoice is the sweep form read into typed values: the protocol version
// and parameter chosen (defaults where none is given) and the range as the
// form gave it. Field refusals are in errs, worded for the page.
type sweepChoice struct {
	version db.ProtocolVersion
	param   string
	cur     screen.Param // the parameter's value in the version
	// the range, as given (for the form) and as numbers once valid
	fromText, toText, stepsText string
	from, to                    float64
	steps                       int
	errs                        map[string]string
}

// parseSweepChoice reads protocol and param from q against the versions
// there are (all, not empty); an unknown version or parameter is refused
// and the default shown instead. deciding gives a version's deciding window
// size (db.DecidingWindow).
func parseSweepChoice(q url.Values, all []db.ProtocolVersion, deciding func(db.ProtocolVersion) int) sweepChoice {
	c := sweepChoice{errs: map[string]string{}}
	for _, p := range all {
		if p.Active && c.version.ID == 0 {
			c.version = p
		}
	}
	if c.version.ID == 0 {
		c.version = all[0]
	}
	if v := strings.TrimSpace(q.Get("protocol")); v != "" {
		id, err := strconv.Atoi(v)
		found := false
		for _, p := range all {
			if err == nil && p.ID == id {
				c.version, found = p, true
			}
		}
		if !found {
			c.errs["protocol"] = "there is no such version; showing " + c.version.Label()
		}
	}
	c.param = q.Get("param")
	valid := false
	for _, sp := range screen.SweepParams(c.version.Params) {
		valid = valid || sp.Path == c.param
	}
	if !valid {
		if c.param != "" {
			c.errs["param"] = "choose one of the listed parameters"
		}
		c.param = defaultSweepParam(deciding(c.version))
	}
	for _, l := range c.version.Params.Params() {
		if l.Path == c.param {
			c.cur = l
		}
	}
	c.fromText, c.toText, c.stepsText = q.Get("from"), q.Get("to"), q.Get("steps")
	return c
}

// integer reports whether the parameter takes whole numbers.
func (c sweepChoice) integer() bool { return c.cur.Kind == "int" }

// defaultRange is the range a sweep of a parameter whose value is cur opens
// with: from half of it to half as much again.
func defaultRange(cur screen.Param) (from, to string) {
	v, _ := strconv.ParseFloat(cur.Value, 64)
	at := func(x float64) string {
		return strconv.FormatFloat(screen.SweepValues(x, 0, 1, cur.Kind == "int")[0], 'g', -1, 64)
	}
	return at(v * 0.5), at(v * 1.5)
}

// withDefaults fills an empty range around the parameter's current value
// (defaultRange), 11 values.
func (c *sweepChoice) withDefaults() {
	from, to := defaultRange(c.cur)
	if c.fromText == "" {
		c.fromText = from
	}
	if c.toText == "" {
		c.toText = to
	}
	if c.stepsText == "" {
		c.stepsText = "11"
	}
}

// parseRange reads from, to and steps as numbers, refusing what is not one.
func (c *sweepChoice) parseRange() {
	number := func(field, text string) float64 {
		v, err := strconv.ParseFloat(strings.TrimSpace(text), 64)
		if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
			c.errs[field] = "enter a number"
		}
		return v
	}
	c.from, c.to = number("from", c.fromText), number("to", c.toText)
	steps, err := strconv.Atoi(strings.TrimSpace(c.stepsText))
	if err != nil || steps < 1 || steps > screen.MaxSweepValues {
		c.errs["steps"] = fmt.Sprintf("enter a whole number from 1 to %d", screen.MaxSweepValues)
	}
	c.steps = steps
}

// values are the values the range asks for.
func (c sweepChoice) values() []float64 {
	return screen.SweepValues(c.from, c.to, c.steps, c.integer())
}

// sweepOptions lists the sweepable parameters of p with their short names,
// each with its value in p and the range a sweep of it opens with, so the
// form's range follows the parameter chosen.
func sweepOptions(p screen.Protocol) []views.SweepParamOption {
	leaves := map[string]screen.Param{}
	for _, l := range p.Params() {
		leaves[l.Path] = l
	}
	var out []views.SweepParamOption
	for _, sp := range screen.SweepParams(p) {
		from, to := defaultRange(leaves[sp.Path])
		out = append(out, views.SweepParamOption{Value: sp.Path, Label: p.ParamName(sp.Path), Help: screen.ParamLabel(sp.Path),
			Current: leaves[sp.Path].Value, From: from, To: to})
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

// sweepHref is the address of one sweep.
func sweepHref(id int64) string { return fmt.Sprintf("/sweep?run=%d", id) }

// sweepModel is the sweep page with the list of earlier sweeps and, when
// there is a protocol at all, the form filled from c (nil: no protocol).
func (s *Server) sweepModel(r *http.Request, c *sweepChoice, all []db.ProtocolVersion) (views.SweepModel, error) {
	m := views.SweepModel{Page: s.page(r, "Threshold sweep", "screening"), Errors: map[string]string{}, PPVUnits: screen.PPVUnits}
	runs, err := s.store.SweepRuns(r.Context(), sweepRecent)
	if err != nil {
		return m, err
	}
	loc := s.studyZone(r.Context())
	params := map[int]screen.Protocol{}
	for _, p := range all {
		params[p.ID] = p.Params
	}
	for _, run := range runs {
		m.Recent = append(m.Recent, views.SweepRunRow{Href: sweepHref(run.ID), ID: strconv.FormatInt(run.ID, 10),
			When: when(run.CreatedAt, loc), By: run.CreatedBy, Param: params[run.ProtocolID].ParamName(run.Param),
			Values: strconv.Itoa(len(run.Values)), State: run.Job.State, Tone: components.Tone(statusTone(run.Job.State))})
	}
	if c == nil {
		return m, nil
	}
	for _, p := range all {
		m.Protocols = append(m.Protocols, views.Option{Value: strconv.Itoa(p.ID), Label: p.Label() + map[bool]string{true: " (active)"}[p.Active]})
	}
	m.ProtocolID, m.Params, m.Param = strconv.Itoa(c.version.ID), sweepOptions(c.version.Params), c.param
	m.ParamName, m.Version = c.version.Params.ParamName(c.param), c.version.Label()
	m.Current, m.From, m.To, m.Steps = c.cur.Value, c.fromText, c.toText, c.stepsText
	for k, v := range c.errs {
		m.Errors[k] = v
	}
	return m, nil
}

// sweepForm reads the versions and the choice in q, defaults filled.
func (s *Server) sweepForm(r *http.Request, q url.Values) (*sweepChoice, []db.ProtocolVersion, error) {
	all, err := s.store.Protocols(r.Context())
	if err != nil || len(all) == 0 {
		return nil, nil, err
	}
	var derr error
	c := parseSweepChoice(q, all, func(v db.ProtocolVersion) int {
		i, ok, err := s.store.DecidingWindow(r.Context(), v.ID)
		if err != nil {
			derr = err
		}
		if !ok || i < 0 || i >= len(v.Params.Windows) {
			return 0
		}
		return i
	})
	if derr != nil {
		return nil, nil, derr
	}
	c.withDefaults()
	return &c, all, nil
}

// sweepPage is the page for the choice in q, with the choice itself.
func (s *Server) sweepPage(r *http.Request, q url.Values) (views.SweepModel, *sweepChoice, error) {
	c, all, err := s.sweepForm(r, q)
	if err != nil {
		return views.SweepModel{}, nil, err
	}
	m, err := s.sweepModel(r, c, all)
	return m, c, err
}

// sweep shows the sweep form, the earlier sweeps and, with ?run=, one
// sweep: its progress while the job runs, its chart and table once done.
// Polled by htmx while the job runs, it answers 204 until the job has ended
// and then asks for a full reload (the chart needs its script).
func (s *Server) sweep(w http.ResponseWriter, r *http.Request) error {
	q := r.URL.Query()
	if q.Get("run") == "" {
		m, c, err := s.sweepPage(r, q)
		if err != nil {
			return err
		}
		status := http.StatusOK
		if c != nil {
			if q.Get("from") != "" || q.Get("to") != "" || q.Get("steps") != "" {
				c.parseRange() // a range in the address is read as strictly as the form
				maps.Copy(m.Errors, c.errs)
			}
			if len(c.errs) > 0 {
				status = http.StatusBadRequest // a choice in the address the page cannot use; the form says which
			}
		}
		s.render(w, r, status, views.Sweep(m))
		return nil
	}
	rq := readQuery(q)
	id := rq.id("run", "sweep number")
	if err := rq.err(); err != nil {
		return err
	}
	run, err := s.store.SweepRun(r.Context(), id)
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
	choice := url.Values{"protocol": {strconv.Itoa(run.ProtocolID)}, "param": {run.Param}, "steps": {strconv.Itoa(len(run.Values))}}
	if len(run.Values) > 0 {
		choice.Set("from", strconv.FormatFloat(run.Values[0], 'g', -1, 64))
		choice.Set("to", strconv.FormatFloat(run.Values[len(run.Values)-1], 'g', -1, 64))
	}
	m, c, err := s.sweepPage(r, choice)
	if err != nil {
		return err
	}
	m.Run = &views.SweepRunState{ID: strconv.FormatInt(run.ID, 10), Href: sweepHref(run.ID), State: run.Job.State,
		Tone: components.Tone(statusTone(run.Job.State)), By: run.CreatedBy, Error: run.Job.Error,
		Progress: fmt.Sprintf("%d of %d participant-weeks swept so far", run.Job.Done, run.Job.Total)}
	if run.Job.Total == 0 {
		m.Run.Progress = "not started yet"
	}
	if run.Result == nil {
		return s.ok(w, r, views.Sweep(m))
	}
	res := *run.Result
	var curVal float64
	if c != nil {
		curVal, _ = strconv.ParseFloat(c.cur.Value, 64)
	}
	m.Ran, m.Protocol, m.Weeks = true, res.Protocol.Label(), res.Weeks
	m.Confirmed, m.NotAF, m.Unreadable, m.Pending = res.ConfirmedWeeks, res.NotAFWeeks, res.UninterpretableWeeks, res.PendingWeeks
	for _, row := range res.Rows {
		m.Rows = append(m.Rows, views.SweepValueRow{Value: strconv.FormatFloat(row.Value, 'g', -1, 64), Current: row.Value == curVal,
			Flagged: row.Flagged, TP: row.Table.TP, FP: row.Table.FP, FN: row.Table.FN,
			PPV: fractionPct(row.PPV), PPVCI: ciText(row.PPVCI), Sensitivity: fractionPct(row.Sensitivity), SensCI: ciText(row.SensitivityCI)})
	}
	chart, scripts, err := sweepChart(res, res.Protocol.Params.ParamName(res.Param))
	if err != nil {
		return err
	}
	m.Chart = &chart
	m.Page.Scripts = append(m.Page.Scripts, scripts...)
	return s.ok(w, r, views.Sweep(m))
}

// sweepStart checks a submitted sweep, queues it and opens it. The form is
// read into typed values here; whether the sweep can run (parameter, values)
// is screen.CheckSweep's rule, applied by the store.
func (s *Server) sweepStart(w http.ResponseWriter, r *http.Request) error {
	if err := r.ParseForm(); err != nil {
		return err
	}
	c, all, err := s.sweepForm(r, r.PostForm)
	if err != nil {
		return err
	}
	status := http.StatusOK // no protocol yet: the page says so
	if c != nil {
		c.parseRange()
		status = http.StatusUnprocessableEntity
		if len(c.errs) == 0 {
			id, err := s.store.StartSweep(r.Context(), s.actor(r), c.version.ID, c.param, c.values())
			if err == nil {
				http.Redirect(w, r, sweepHref(id), http.StatusSeeOther)
				return nil
			}
			f, ok := refused(r, err, nil)
			if !ok {
				return err
			}
			maps.Copy(c.errs, f.Fields)
			status = f.Status
		}
	}
	m, err := s.sweepModel(r, c, all)
	if err != nil {
		return err
	}
	s.render(w, r, status, views.Sweep(m))
	return nil
}

// sweepChart draws weeks flagged (left axis) and PPV and sensitivity with
// their Wilson intervals as percentages (right axis) against the value.
func sweepChart(res db.SweepResult, name string) (components.ChartModel, []string, error) {
	line := charts.NewLine()
	line.SetGlobalOptions(
		charts.WithInitializationOpts(chartInit("sweep-chart")),
		charts.WithAnimation(false),
		charts.WithTooltipOpts(opts.Tooltip{Show: opts.Bool(true), Trigger: "axis"}),
		charts.WithLegendOpts(opts.Legend{Show: opts.Bool(true), Bottom: "0"}),
		charts.WithXAxisOpts(opts.XAxis{Name: name, Type: "category", NameLocation: "middle", NameGap: 28}),
		charts.WithYAxisOpts(opts.YAxis{Name: "weeks flagged", Type: "value"}),
	)
	line.ExtendYAxis(opts.YAxis{Name: "%", Type: "value", Min: 0, Max: 100, Position: "right"})
	x := make([]string, len(res.Rows))
	flagged := make([]opts.LineData, len(res.Rows))
	var ppv, ppvLo, ppvHi, sens []opts.LineData
	for i, r := range res.Rows {
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
	right := []charts.SeriesOpts{charts.WithLineChartOpts(opts.LineChart{YAxisIndex: 1})}
	line.SetXAxis(x).
		AddSeries("Weeks flagged", flagged, paint(chartPositive)...).
		AddSeries("Per-week PPV %", ppv, with(right, paint(chartMeasure))...).
		AddSeries("Per-week PPV 95% CI, low", ppvLo, with(right, paint(chartBand))...).
		AddSeries("Per-week PPV 95% CI, high", ppvHi, with(right, paint(chartBand))...).
		AddSeries("Sensitivity %", sens, with(right, paint(chartMeasure2))...)
	return chartView("sweep-chart", "Weeks flagged, per-week PPV and sensitivity for each value of "+name, line, true)
}

// percentPoint is a percentage, or a gap in the line when there is no value.
func percentPoint(f float64) opts.LineData {
	if math.IsNaN(f) {
		return opts.LineData{Value: "-"}
	}
	return opts.LineData{Value: math.Round(f*1000) / 10}
}
