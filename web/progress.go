package web

import (
	"context"
	"fmt"
	"net/http"
	"strconv"

	"cohortdesk/cohort/stats"
	"cohortdesk/db"
	"cohortdesk/views"

	"github.com/go-echarts/go-echarts/v2/charts"
	"github.com/go-echarts/go-echarts/v2/opts"
)

type progressStore interface {
	Enrolment(ctx context.Context) (db.EnrolmentHistory, error)
	DataSufficiency(ctx context.Context) ([]db.SufficiencyWeek, error)
	SilentParticipants(ctx context.Context, days int) ([]db.SilentParticipant, error)
}

// silentDays is how long without data makes a participant worth a call.
const silentDays = 14

func projectionRow(label string, enrolled, withdrawn, target int, weekly []int, window int, asOf db.EnrolmentHistory) views.EnrolmentRow {
	row := views.EnrolmentRow{Label: label, Target: target, Enrolled: enrolled, Withdrawn: withdrawn}
	if target > 0 {
		row.Percent = fmt.Sprintf("%.0f%%", 100*float64(enrolled)/float64(target))
	}
	recent := weekly
	if len(recent) > window {
		recent = recent[len(recent)-window:]
	}
	if target == 0 {
		row.Projection = "no target set"
		return row
	}
	p, err := stats.ProjectEnrolment(asOf.Today, enrolled, target, recent, 0.95)
	if err != nil {
		row.Projection = "cannot project: " + err.Error()
		return row
	}
	row.Rate = fmt.Sprintf("%.1f a week (95%% CI %.1f–%.1f) over %d weeks", p.Expected.RatePerWeek, p.Pessimistic.RatePerWeek, p.Optimistic.RatePerWeek, p.Window)
	switch {
	case p.Met:
		row.Projection = "target reached"
	case !p.Expected.Reachable:
		row.Projection = "not reachable at the recent rate (no enrolments in the window)"
	default:
		row.Projection = p.Expected.Date.String()
		if p.Optimistic.Reachable {
			row.Range = p.Optimistic.Date.String() + " to "
			if p.Pessimistic.Reachable {
				row.Range += p.Pessimistic.Date.String()
			} else {
				row.Range += "not reachable at the lower rate"
			}
		}
	}
	return row
}

func (s *Server) progress(w http.ResponseWriter, r *http.Request) error {
	ctx := r.Context()
	window, err := strconv.Atoi(r.URL.Query().Get("window"))
	if err != nil || window < 2 || window > 52 {
		window = 8
	}
	h, err := s.store.Enrolment(ctx)
	if err != nil {
		return err
	}
	m := views.ProgressModel{Page: s.page(r, "Progress", "progress"), Window: window, AsOf: h.Today.String()}
	total := make([]int, len(h.Weeks))
	var tEnrolled, tWithdrawn, tTarget int
	for _, se := range h.Sites {
		m.Enrolment = append(m.Enrolment, projectionRow(se.Code+" · "+se.Name, se.Enrolled, se.Withdrawn, se.Target, se.Weekly, window, h))
		for i, c := range se.Weekly {
			total[i] += c
		}
		tEnrolled += se.Enrolled
		tWithdrawn += se.Withdrawn
		tTarget += se.Target
	}
	m.Total = projectionRow("All sites", tEnrolled, tWithdrawn, tTarget, total, window, h)

	// Cumulative enrolment by week, one line per site plus the total, and the
	// total target as a dashed line.
	line := charts.NewLine()
	line.SetGlobalOptions(charts.WithInitializationOpts(chartInit("enrolment")),
		charts.WithTooltipOpts(opts.Tooltip{Show: opts.Bool(true), Trigger: "axis"}),
		charts.WithLegendOpts(opts.Legend{Show: opts.Bool(true), Bottom: "0"}),
		charts.WithYAxisOpts(opts.YAxis{Name: "participants"}))
	labels := make([]string, len(h.Weeks))
	for i, d := range h.Weeks {
		labels[i] = d.String()
	}
	line.SetXAxis(labels)
	cum := func(weekly []int) []opts.LineData {
		out := make([]opts.LineData, len(weekly))
		sum := 0
		for i, c := range weekly {
			sum += c
			out[i] = opts.LineData{Value: sum}
		}
		return out
	}
	for _, se := range h.Sites {
		line.AddSeries(se.Code, cum(se.Weekly))
	}
	line.AddSeries("all sites", cum(total))
	if tTarget > 0 {
		tgt := make([]opts.LineData, len(labels))
		for i := range tgt {
			tgt[i] = opts.LineData{Value: tTarget}
		}
		line.AddSeries("target (all sites)", tgt, charts.WithLineStyleOpts(opts.LineStyle{Type: "dashed"}))
	}
	ch, scripts, err := chartView("enrolment", "Cumulative enrolment by week for each site and in all, with the target", line, false)
	if err != nil {
		return err
	}
	m.EnrolmentChart = ch
	m.Page.Scripts = scripts

	suff, err := s.store.DataSufficiency(ctx)
	if err != nil {
		return err
	}
	sl := charts.NewLine()
	sl.SetGlobalOptions(charts.WithInitializationOpts(chartInit("sufficiency")),
		charts.WithTooltipOpts(opts.Tooltip{Show: opts.Bool(true), Trigger: "axis"}),
		charts.WithYAxisOpts(opts.YAxis{Name: "% with enough wear", Min: 0, Max: 100}))
	var sx []string
	var sy []opts.LineData
	for _, w := range suff {
		share := 0.0
		if w.Active > 0 {
			share = 100 * float64(w.Sufficient) / float64(w.Active)
		}
		sx = append(sx, w.Week.String())
		sy = append(sy, opts.LineData{Value: fmt.Sprintf("%.1f", share)})
		m.Sufficiency = append(m.Sufficiency, views.SufficiencyRow{Week: w.Week.String(), Due: w.Active, Sufficient: w.Sufficient, Share: fmt.Sprintf("%.0f%%", share)})
	}
	sl.SetXAxis(sx).AddSeries("share of participant-weeks with enough usable wear", sy)
	sch, _, err := chartView("sufficiency", "Share of participant-weeks with enough usable wear, by calendar week", sl, false)
	if err != nil {
		return err
	}
	m.SufficiencyChart = sch

	silent, err := s.store.SilentParticipants(ctx, silentDays)
	if err != nil {
		return err
	}
	m.SilentDays = silentDays
	for _, sp := range silent {
		last := "never"
		if sp.LastData != nil {
			last = sp.LastData.Format("2006-01-02")
		}
		m.Silent = append(m.Silent, views.SilentRow{Href: fmt.Sprintf("/participants/%d", sp.ID), StudyID: sp.StudyID, Site: sp.SiteCode, Last: last, Days: sp.Days})
	}
	s.progressCascade(r, &m)
	return s.ok(w, r, views.Progress(m))
}
