package web

import (
	"context"
	"fmt"
	"net/http"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/cascade"
	"cohortdesk/cohort/enrolment"
	"cohortdesk/db"
	"cohortdesk/views"

	"github.com/a-h/templ"
	"github.com/go-echarts/go-echarts/v2/charts"
	"github.com/go-echarts/go-echarts/v2/opts"
	"golang.org/x/sync/errgroup"
)

type progressStore interface {
	Enrolment(ctx context.Context, asOf cohort.Date) (enrolment.History, error)
	DataSufficiency(ctx context.Context) ([]db.SufficiencyWeek, error)
	SilentParticipants(ctx context.Context, days int, after string, limit int) (db.SilentPage, error)
	Pending(ctx context.Context) (db.FiguresPending, error)
	Cascade(ctx context.Context, f cascade.Filter) (cascade.Cascade, error)
	CascadeMembersAfter(ctx context.Context, f cascade.Filter, box int, exit cascade.ExitReason, after int64, limit int) (db.BoxPage, error)
	Figures(ctx context.Context, f cascade.Filter) (cascade.Cascade, cascade.Agreement, error)
	Sites(ctx context.Context) ([]db.Site, error)
}

// silentDays is how long without data makes a participant worth a call.
const silentDays = 14

// silentPageSize is how many silent participants the progress page lists at
// once; the rest are a "next" link away.
const silentPageSize = 25

// defaultWindow is the weeks of history the projection uses unless asked.
const defaultWindow = 8

// windowOf reads the projection's weeks of history: the default when the
// parameter is missing, refused when it is out of range.
func windowOf(q *query) int {
	if w, ok := q.number("window", 2, enrolment.TrailingWeeks, "weeks of history"); ok {
		return w
	}
	return defaultWindow
}

// freshness says, when kept figures wait to be computed, how current the
// page's figures are; "" when they are current. The time is the study's
// (loc), in the one date style.
func freshness(p db.FiguresPending, loc *time.Location) string {
	switch {
	case p.Building:
		return "The study's figures are being built for the first time; the counts below are incomplete until that finishes."
	case p.Participants == 0:
		return ""
	}
	who := cohort.Plural(p.Participants, "participant")
	if p.Participants >= db.PendingCap {
		who = "more than " + who
	}
	return fmt.Sprintf("Figures of %s changed by a bulk load are being brought up to date (waiting since %s); the counts below do not include them yet.",
		who, when(p.Since, loc))
}

// enrolFig is one row of the enrolment table on the progress page, the
// weekly report and its CSV: a site's (or the study's) figures
// (enrolment.History.Project) with the words that name it.
type enrolFig struct {
	label string
	key   string // site code, or "all"
	enrolment.Figures
}

// studyFigures is every site's row and the total row.
func studyFigures(h enrolment.History, window int) ([]enrolFig, enrolFig) {
	sites, total := h.Project(window)
	rows := make([]enrolFig, len(sites))
	for i, f := range sites {
		rows[i] = enrolFig{label: f.Site.Code + " · " + f.Site.Name, key: f.Site.Code, Figures: f}
	}
	return rows, enrolFig{label: "All sites", key: "all", Figures: total}
}

// percent is enrolled as a share of the target, "" without one.
func (f enrolFig) percent() string {
	if f.Site.Target <= 0 {
		return ""
	}
	return fmt.Sprintf("%.0f%%", 100*float64(f.Enrolled)/float64(f.Site.Target))
}

// dates words the projection: the expected date and the range of the
// interval's scenarios, each day written by day (cohort.Date.Label on
// pages, cohort.Date.String in files).
func (f enrolFig) dates(day func(cohort.Date) string) (projection, earliest, latest string) {
	if !f.Projected {
		return f.Why, "", ""
	}
	p := f.Projection
	switch {
	case p.Met:
		return "target reached", "", ""
	case !p.Expected.Reachable:
		projection = "not reachable at the recent rate (no enrolments in the window)"
	default:
		projection = day(p.Expected.Date)
	}
	if p.Optimistic.Reachable {
		earliest = day(p.Optimistic.Date)
		latest = "not reachable at the lower rate"
		if p.Pessimistic.Reachable {
			latest = day(p.Pessimistic.Date)
		}
	}
	return projection, earliest, latest
}

func (f enrolFig) row() views.EnrolmentRow {
	row := views.EnrolmentRow{Key: f.key, Label: f.label, Target: f.Site.Target, Enrolled: f.Enrolled, Withdrawn: f.Withdrawn, Percent: f.percent()}
	var earliest, latest string
	row.Projection, earliest, latest = f.dates(cohort.Date.Label)
	if f.Projected {
		p := f.Projection
		row.Rate = fmt.Sprintf("%.1f a week (95%% CI %.1f–%.1f) over %d weeks", p.Expected.RatePerWeek, p.Pessimistic.RatePerWeek, p.Optimistic.RatePerWeek, p.Window)
		if !p.Met && p.Expected.Reachable && earliest != "" {
			row.Range = earliest + " to " + latest
		}
	}
	return row
}

func (s *Server) progress(w http.ResponseWriter, r *http.Request) error {
	q := readQuery(r.URL.Query())
	window := windowOf(q)
	if err := q.err(); err != nil {
		return err
	}
	// The page's four reads are independent; made side by side, the page
	// takes about as long as the slowest of them instead of their sum.
	var (
		h       enrolment.History
		suff    []db.SufficiencyWeek
		silent  db.SilentPage
		pending db.FiguresPending
		section templ.Component
	)
	g, ctx := errgroup.WithContext(r.Context())
	g.Go(func() (err error) { h, err = s.store.Enrolment(ctx, cohort.Date{}); return err })
	g.Go(func() (err error) { suff, err = s.store.DataSufficiency(ctx); return err })
	g.Go(func() (err error) {
		silent, err = s.store.SilentParticipants(ctx, silentDays, r.URL.Query().Get("silent_after"), silentPageSize)
		return err
	})
	g.Go(func() (err error) { pending, err = s.store.Pending(ctx); return err })
	g.Go(func() (err error) { section, err = s.progressCascade(ctx, r.URL.Query(), window); return err })
	d := disclosureOf(r)
	var first cohort.Date
	g.Go(func() (err error) { first, err = s.firstEnrolment(ctx, d); return err })
	if err := g.Wait(); err != nil {
		return err
	}
	m := views.ProgressModel{Page: s.page(r, "Progress", "progress"), Window: window, AsOf: h.Today.Label()}
	figs, all := studyFigures(h, window)
	for _, f := range figs {
		m.Enrolment = append(m.Enrolment, f.row())
	}
	m.Total = all.row()
	total := make([]int, len(h.Weeks))
	for _, se := range h.Sites {
		for i, c := range se.Weekly {
			total[i] += c
		}
	}
	tTarget := all.Site.Target

	// Cumulative enrolment by week, one line per site plus the total, and the
	// total target as a dashed line.
	line := charts.NewLine()
	line.SetGlobalOptions(charts.WithInitializationOpts(chartInit("enrolment")),
		charts.WithTooltipOpts(opts.Tooltip{Show: opts.Bool(true), Trigger: "axis"}),
		charts.WithLegendOpts(opts.Legend{Show: opts.Bool(true), Bottom: "0"}),
		charts.WithYAxisOpts(opts.YAxis{Name: "participants"}))
	labels := make([]string, len(h.Weeks))
	for i, wk := range h.Weeks {
		labels[i] = d.calendarWeek(first, wk)
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
	for i, se := range h.Sites {
		line.AddSeries(se.Code, cum(se.Weekly), paintGroup(i)...)
	}
	line.AddSeries("all sites", cum(total), paint(chartTotal)...)
	if tTarget > 0 {
		tgt := make([]opts.LineData, len(labels))
		for i := range tgt {
			tgt[i] = opts.LineData{Value: tTarget}
		}
		line.AddSeries("target (all sites)", tgt, paint(chartThreshold)...)
	}
	ch, scripts, err := chartView("enrolment", "Cumulative enrolment by week for each site and in all, with the target", line, false)
	if err != nil {
		return err
	}
	m.EnrolmentChart = ch
	m.Page.Scripts = scripts

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
		label := d.calendarWeek(first, w.Week)
		sx = append(sx, label)
		sy = append(sy, opts.LineData{Value: fmt.Sprintf("%.1f", share)})
		m.Sufficiency = append(m.Sufficiency, views.SufficiencyRow{Key: d.weekKey(first, w.Week), Week: label, Due: w.Active, Sufficient: w.Sufficient, Share: fmt.Sprintf("%.0f%%", share)})
	}
	sl.SetXAxis(sx).AddSeries("share of participant-weeks with enough usable wear", sy, paint(chartMeasure)...)
	sch, _, err := chartView("sufficiency", "Share of participant-weeks with enough usable wear, by calendar week", sl, false)
	if err != nil {
		return err
	}
	m.SufficiencyChart = sch

	m.SilentDays, m.SilentTotal, m.SilentAtLeast, m.Freshness = silentDays, silent.Total, silent.AtLeast, freshness(pending, s.studyZone(ctx))
	if silent.Next != "" {
		q := r.URL.Query()
		q.Set("silent_after", silent.Next)
		m.SilentNext = "/progress?" + q.Encode() + "#silent"
	}
	if r.URL.Query().Get("silent_after") != "" {
		q := r.URL.Query()
		q.Del("silent_after")
		m.SilentFirst = "/progress?" + q.Encode() + "#silent"
	}
	for _, sp := range silent.Rows {
		last := "never"
		if sp.LastData != nil {
			last = d.dayAt(sp.EnrolledOn, sp.Location(), *sp.LastData) // the day in the participant's zone
		}
		m.Silent = append(m.Silent, views.SilentRow{Href: fmt.Sprintf("/participants/%d", sp.ID), StudyID: sp.StudyID, Site: sp.SiteCode, Last: last, Days: sp.Days})
	}
	m.Cascade = section
	return s.ok(w, r, views.Progress(m))
}
