package web

import (
	"archive/zip"
	"bytes"
	"encoding/csv"
	"encoding/json"
	"fmt"
	"net/http"
	"strconv"
	"time"

	"cohortdesk/cohort"
	"cohortdesk/cohort/cascade"
	"cohortdesk/cohort/deid"
	"cohortdesk/cohort/enrolment"
	"cohortdesk/db"
	"cohortdesk/views"

	"golang.org/x/sync/errgroup"
)

// reportFigures is everything the weekly report shows, read from the same
// store functions as the pages (Enrolment, DataSufficiency, and the cascade
// and agreement figures from one read). The printable page and the CSV
// bundle are both written from one value of it.
type reportFigures struct {
	cq        cascadeQuery
	window    int
	generated time.Time
	hist      enrolment.History
	sites     []enrolFig
	total     enrolFig
	weeks     []db.SufficiencyWeek // the calendar weeks that overlap the period
	weekSpan  string
	cascade   cascade.Cascade
	agree     cascade.Agreement
	week      reportWeek // the days reported and what the study did in them
	today     cohort.Date
	// disclose words the calendar weeks (dates, or recruitment weeks counted
	// from first, the study's first enrolment) for the request's role.
	disclose disclosure
	first    cohort.Date
}

// readReport parses the report's choices and reads its figures.
func (s *Server) readReport(r *http.Request) (reportFigures, []db.Site, error) {
	ctx := r.Context()
	var rf reportFigures
	sites, err := s.store.Sites(ctx)
	if err != nil {
		return rf, nil, err
	}
	q := readQuery(r.URL.Query())
	readCascadeQuery(q, sites, &rf.cq)
	rf.window, rf.generated = windowOf(q), s.now()
	q.oneOf("paper", paperA4, paperLetter)
	loc := s.studyZone(ctx)
	rf.today = cohort.DateOf(rf.generated.In(loc))
	// A role that sees no dates chooses the week in recruitment weeks,
	// counted from the first enrolment: read first.
	rf.disclose = disclosureOf(r)
	if rf.first, err = s.firstEnrolment(ctx, rf.disclose); err != nil {
		return rf, nil, err
	}
	rf.week = readReportWeek(q, rf.today, rf.disclose, rf.first)
	if err := q.err(); err != nil {
		return rf, nil, err
	}
	// The three reads are independent; made side by side, as on the
	// progress page.
	var weeks []db.SufficiencyWeek
	g, gctx := errgroup.WithContext(ctx)
	g.Go(func() (err error) { rf.hist, err = s.store.Enrolment(gctx, rf.cq.to); return err })
	g.Go(func() (err error) { weeks, err = s.store.DataSufficiency(gctx); return err })
	g.Go(func() (err error) { rf.cascade, rf.agree, err = s.store.Figures(gctx, rf.cq.filter); return err })
	g.Go(func() (err error) {
		rf.week.week, rf.week.sofar, err = s.store.Activity(gctx, rf.cq.filter.SiteID, rf.week.from, rf.week.to, loc)
		return err
	})
	if err := g.Wait(); err != nil {
		return rf, nil, err
	}
	rf.sites, rf.total = studyFigures(rf.hist, rf.window)
	first := cohort.Date{}
	if !rf.cq.from.IsZero() {
		first = rf.cq.from.Monday()
	}
	for _, w := range weeks {
		if (first.IsZero() || !w.Week.Before(first)) && !rf.hist.Today.Before(w.Week) {
			rf.weeks = append(rf.weeks, w)
		}
	}
	switch {
	case len(rf.weeks) == 0:
		rf.weekSpan = "No completed participant-week in the period"
	case rf.disclose.dates:
		rf.weekSpan = "Calendar weeks (Monday to Sunday) from " + rf.weeks[0].Week.Label() + " to the week of " + rf.weeks[len(rf.weeks)-1].Week.Label()
	default:
		rf.weekSpan = "Calendar weeks (Monday to Sunday), counted from the week of the study's first enrolment: from " +
			rf.disclose.calendarWeek(rf.first, rf.weeks[0].Week) + " to " + rf.disclose.calendarWeek(rf.first, rf.weeks[len(rf.weeks)-1].Week)
	}
	return rf, sites, nil
}

// sufficiencyRow words one week (or the total) of data sufficiency.
func sufficiencyRow(label string, due, sufficient int) views.SufficiencyRow {
	share := 0.0
	if due > 0 {
		share = 100 * float64(sufficient) / float64(due)
	}
	return views.SufficiencyRow{Week: label, Due: due, Sufficient: sufficient, Share: fmt.Sprintf("%.0f%%", share)}
}

// weeksTotal adds up the period's participant-weeks.
func (rf reportFigures) weeksTotal() (due, sufficient int) {
	for _, w := range rf.weeks {
		due += w.Active
		sufficient += w.Sufficient
	}
	return due, sufficient
}

// overall is the agreement row of all the version's episodes.
func (rf reportFigures) overall() cascade.Group {
	for _, g := range rf.agree.Groups {
		if g.Dimension == "all" {
			return g
		}
	}
	return cascade.Group{}
}

// reportGroups are the agreement rows the report shows: all, then by site.
func (rf reportFigures) reportGroups() []cascade.Group {
	var out []cascade.Group
	for _, g := range rf.agree.Groups {
		if g.Dimension == "all" || g.Dimension == "site" {
			out = append(out, g)
		}
	}
	return out
}

// reportHref is the report's address with its choices and extra values.
func (rf reportFigures) reportHref(path string, paper string, extra ...string) string {
	return rf.cq.href(path, append(append([]string{"window", strconv.Itoa(rf.window), "paper", paper}, rf.week.values()...), extra...)...)
}

// progressReport is the weekly report as one printable page.
func (s *Server) progressReport(w http.ResponseWriter, r *http.Request) error {
	rf, sites, err := s.readReport(r)
	if err != nil {
		return err
	}
	paper := paperParam(readQuery(r.URL.Query()), s.studyPaper(r.Context())) // refused already by readReport
	m := views.ReportModel{Page: s.page(r, "Weekly report", "progress"), Paper: paper, Protocols: protocolOptions(rf.cascade.Versions),
		ProtoID: strconv.Itoa(rf.cascade.Protocol.ID), SiteID: rf.cq.site, From: dateText(rf.cq.from), To: dateText(rf.cq.to), Window: rf.window,
		Period: rf.cq.period(), Protocol: rf.cascade.Protocol.Label(), AsOf: rf.hist.Today.Label(),
		Generated: when(rf.generated, s.studyZone(r.Context())), CSVHref: rf.cq.href("/progress/report.zip", append([]string{"window", strconv.Itoa(rf.window)}, rf.week.values()...)...),
		Week: rf.week.label(rf.disclose, rf.first), Activity: rf.week.activityFigures(),
		WeekSpan: rf.weekSpan, Flow: flowView(rf.cascade, rf.cq), StatsAsOf: rf.agree.AsOf.Label()}
	m.Flow.Compact = true
	for _, st := range sites {
		m.Sites = append(m.Sites, views.Option{Value: strconv.Itoa(st.ID), Label: st.Code + " · " + st.Name})
	}
	for _, p := range []string{paperA4, paperLetter} {
		m.PaperLinks = append(m.PaperLinks, views.PaperLink{Href: rf.reportHref("/progress/report", p), Label: paperLabel(p), Current: p == paper})
	}
	// Ready-made weeks keep the other choices; the cascade stays cumulative.
	if rf.disclose.dates {
		m.Since, m.Until = rf.week.from.String(), rf.week.to.String()
	} else {
		a, b := rf.week.recruitmentWeeks()
		m.RecruitmentWeeks, m.WeekFrom, m.WeekTo = true, strconv.Itoa(a), strconv.Itoa(b)
	}
	m.Quick = weekLinks(rf.week, rf.today, func(week []string) string {
		return rf.cq.href("/progress/report", append([]string{"window", strconv.Itoa(rf.window), "paper", paper}, week...)...)
	})
	for _, f := range rf.sites {
		m.Enrolment = append(m.Enrolment, f.row())
	}
	m.Total = rf.total.row()
	for _, wk := range rf.weeks {
		row := sufficiencyRow(rf.disclose.calendarWeek(rf.first, wk.Week), wk.Active, wk.Sufficient)
		row.Key = rf.disclose.weekKey(rf.first, wk.Week)
		m.Weeks = append(m.Weeks, row)
	}
	due, enough := rf.weeksTotal()
	m.WeeksTotal = sufficiencyRow("All weeks shown", due, enough)
	for _, g := range rf.reportGroups() {
		m.Agreement = append(m.Agreement, statRow(g))
	}
	m.Kappa = kappaView(rf.agree.Kappa)
	m.Figures = rf.keyFigures(m)
	return s.ok(w, r, views.Report(m))
}

// keyFigures are the report's headline numbers, each worded as the tables
// below it word it.
func (rf reportFigures) keyFigures(m views.ReportModel) []views.ReportFigure {
	c := rf.cascade
	all := statRow(rf.overall())
	total := m.Total
	of := ""
	if total.Percent != "" {
		of = " of " + strconv.Itoa(total.Target) + " (" + total.Percent + ")"
	}
	kappa := "—"
	if m.Kappa.Note == "" {
		kappa = m.Kappa.Kappa
	}
	return []views.ReportFigure{
		{Key: "enrolled", Label: "enrolled in the period", Value: strconv.Itoa(c.Box("enrolled").Count()), Note: rf.cq.period()},
		{Key: "enrolled-total", Label: "enrolled by " + rf.hist.Today.Label() + of, Value: strconv.Itoa(total.Enrolled), Note: "target: " + total.Projection},
		{Key: "sufficiency", Label: "participant-weeks with enough wear", Value: m.WeeksTotal.Share,
			Note: strconv.Itoa(m.WeeksTotal.Sufficient) + " of " + strconv.Itoa(m.WeeksTotal.Due)},
		{Key: "screen-positive", Label: "screen-positive participants", Value: strconv.Itoa(c.Box("screen_positive").Count())},
		{Key: "af-confirmed", Label: "AF confirmed", Value: strconv.Itoa(c.Box("af_confirmed").Count()), Note: strconv.Itoa(c.Box("referred").Count()) + " referred"},
		{Key: "ppv", Label: "PPV of the flag", Value: all.PPV, Note: "Wilson 95% " + all.Wilson},
		{Key: "median", Label: "median days from flag to over-read", Value: all.Median, Note: "95% CI " + all.MedianCI},
		{Key: "kappa", Label: "kappa, recorder against over-read", Value: kappa},
	}
}

// csvTable is one file of the report's bundle being written.
type csvTable struct {
	name string
	buf  bytes.Buffer
	cw   *csv.Writer
	rows int
}

func newCSVTable(name string, header ...string) *csvTable {
	t := &csvTable{name: name}
	t.cw = csv.NewWriter(&t.buf)
	_ = t.cw.Write(header)
	return t
}

func (t *csvTable) add(rec ...string) {
	t.rows++
	_ = t.cw.Write(rec)
}

func (t *csvTable) bytes() ([]byte, error) {
	t.cw.Flush()
	if err := t.cw.Error(); err != nil {
		return nil, fmt.Errorf("web: report %s: %w", t.name, err)
	}
	return t.buf.Bytes(), nil
}

// reportManifest is manifest.json of the report's bundle.
type reportManifest struct {
	Kind      string         `json:"kind"`
	CreatedAt string         `json:"created_at"`
	Period    string         `json:"period"`
	From      string         `json:"enrolled_from,omitempty"`
	To        string         `json:"enrolled_to,omitempty"`
	Site      string         `json:"site,omitempty"`
	Protocol  string         `json:"protocol"`
	AsOf      string         `json:"enrolment_as_of"`
	Files     []manifestFile `json:"files"`
}

// reportTables writes the report's numbers as CSV tables, one per table of
// the printed page, plus a summary of the headline numbers.
func (rf reportFigures) reportTables() []*csvTable {
	enrol := newCSVTable("enrolment.csv", "site", "site_name", "target", "enrolled", "withdrawn", "percent_of_target", "window_weeks",
		"enrolled_in_window", "rate_per_week", "rate_lo", "rate_hi", "projected", "earliest", "latest")
	names := map[string]string{}
	for _, se := range rf.hist.Sites {
		names[se.Code] = se.Name
	}
	for _, f := range append(append([]enrolFig{}, rf.sites...), rf.total) {
		projected, earliest, latest := f.dates(cohort.Date.String)
		window, count, rate, lo, hi := "", "", "", "", ""
		if f.Projected {
			window, count = strconv.Itoa(f.Projection.Window), strconv.Itoa(f.Projection.Count)
			rate, lo, hi = num(f.Projection.Expected.RatePerWeek), num(f.Projection.Pessimistic.RatePerWeek), num(f.Projection.Optimistic.RatePerWeek)
		}
		pctOf := ""
		if f.Site.Target > 0 {
			pctOf = num(float64(f.Enrolled) / float64(f.Site.Target))
		}
		enrol.add(csvSafe(f.key), csvSafe(names[f.key]), strconv.Itoa(f.Site.Target), strconv.Itoa(f.Enrolled), strconv.Itoa(f.Withdrawn), pctOf,
			window, count, rate, lo, hi, projected, earliest, latest)
	}

	weekCol := "week_monday"
	if !rf.disclose.dates {
		weekCol = "recruitment_week" // calendar weeks counted from the week of the first enrolment, no dates
	}
	suff := newCSVTable("sufficiency.csv", weekCol, "participant_weeks_due", "with_enough_wear", "share")
	for _, w := range rf.weeks {
		share := ""
		if w.Active > 0 {
			share = num(float64(w.Sufficient) / float64(w.Active))
		}
		week := w.Week.String()
		if !rf.disclose.dates {
			week = strconv.Itoa(deid.RecruitmentWeek(rf.first, w.Week))
		}
		suff.add(week, strconv.Itoa(w.Active), strconv.Itoa(w.Sufficient), share)
	}

	boxes := newCSVTable("cascade.csv", "step", "box", "label", "participants", "flagged_episodes", "share_of_previous", "left", "in_progress")
	exits := newCSVTable("cascade_exits.csv", "box", "reason", "label", "in_progress", "participants")
	for i, b := range rf.cascade.Boxes {
		share, cases := "", ""
		if i > 0 && rf.cascade.Boxes[i-1].Count() > 0 {
			share = num(float64(b.Count()) / float64(rf.cascade.Boxes[i-1].Count()))
		}
		if i >= 2 {
			cases = strconv.Itoa(b.CaseN)
		}
		left, waiting := 0, 0
		for _, e := range b.Exits {
			if e.Reason.InProgress() {
				waiting += e.N
			} else {
				left += e.N
			}
			exits.add(b.Key, string(e.Reason), e.Reason.Label(), strconv.FormatBool(e.Reason.InProgress()), strconv.Itoa(e.N))
		}
		boxes.add(strconv.Itoa(i+1), b.Key, b.Label, strconv.Itoa(b.Count()), cases, share, strconv.Itoa(left), strconv.Itoa(waiting))
	}

	agree := newCSVTable("agreement.csv", agreementHeader()...)
	for _, g := range rf.agree.Groups {
		agree.add(agreementRecord(g)...)
	}

	k := rf.agree.Kappa
	kappa := newCSVTable("kappa.csv", "recorder", "over_read", "recordings")
	for i, row := range k.Table {
		for j, v := range row {
			kappa.add(string(k.Categories[i]), string(k.Categories[j]), strconv.Itoa(v))
		}
	}

	sum := newCSVTable("summary.csv", "figure", "value")
	put := func(name, v string) { sum.add(name, v) }
	put("enrolled_from", dateText(rf.cq.from))
	put("enrolled_to", dateText(rf.cq.to))
	put("site", rf.cq.siteCode)
	put("protocol", csvSafe(rf.cascade.Protocol.Label()))
	put("enrolment_as_of", rf.hist.Today.String())
	put("enrolled_in_period", strconv.Itoa(rf.cascade.Box("enrolled").Count()))
	put("enrolled_total", strconv.Itoa(rf.total.Enrolled))
	put("target_total", strconv.Itoa(rf.total.Site.Target))
	due, enough := rf.weeksTotal()
	put("participant_weeks_due", strconv.Itoa(due))
	put("participant_weeks_enough_wear", strconv.Itoa(enough))
	for _, b := range rf.cascade.Boxes {
		put("cascade_"+b.Key, strconv.Itoa(b.Count()))
	}
	g := rf.overall()
	put("flagged_episodes", strconv.Itoa(g.Flagged))
	put("over_read_episodes", strconv.Itoa(g.OverRead))
	put("af_confirmed_episodes", strconv.Itoa(g.Confirmed))
	if g.OverRead > 0 {
		put("ppv", num(g.PPV.Value()))
		put("ppv_wilson_lo", num(g.Wilson.Lo))
		put("ppv_wilson_hi", num(g.Wilson.Hi))
		put("ppv_exact_lo", num(g.Exact.Lo))
		put("ppv_exact_hi", num(g.Exact.Hi))
	}
	put("uninterpretable", strconv.Itoa(g.Uninterpretable.X))
	put("settled_read", strconv.Itoa(g.Uninterpretable.N))
	if g.Flagged > 0 && g.Median.Reached {
		put("median_days_to_over_read", num(g.Median.Time))
	}
	put("kappa_recordings", strconv.Itoa(k.N))
	if k.Err == "" {
		put("kappa", num(k.Kappa.Kappa))
		put("kappa_lo", num(k.CI.Lo))
		put("kappa_hi", num(k.CI.Hi))
	}
	return []*csvTable{sum, rf.week.activityTable(), enrol, suff, boxes, exits, agree, kappa}
}

// progressReportZip downloads the weekly report's numbers: a zip of CSV
// files, one per table, and a manifest with each file's rows, size and
// SHA-256. The download is audited with its manifest before it is sent.
func (s *Server) progressReportZip(w http.ResponseWriter, r *http.Request) error {
	rf, _, err := s.readReport(r)
	if err != nil {
		return err
	}
	man := reportManifest{Kind: "weekly progress report", CreatedAt: rf.generated.UTC().Format("2006-01-02T15:04:05Z"), Period: rf.cq.period(),
		From: dateText(rf.cq.from), To: dateText(rf.cq.to), Site: rf.cq.siteCode, Protocol: rf.cascade.Protocol.Label(), AsOf: rf.hist.Today.String()}
	var buf bytes.Buffer
	zw := zip.NewWriter(&buf)
	for _, t := range rf.reportTables() {
		b, err := t.bytes()
		if err != nil {
			return err
		}
		rows := t.rows
		man.Files = append(man.Files, manifestFile{Name: t.name, Rows: &rows, Bytes: int64(len(b)), SHA256: sha256Hex(b)})
		if err := zipFile(zw, t.name, b); err != nil {
			return err
		}
	}
	cf, err := zipCautions(zw)
	if err != nil {
		return err
	}
	man.Files = append(man.Files, cf)
	mj, err := json.MarshalIndent(man, "", "  ")
	if err != nil {
		return fmt.Errorf("web: report manifest: %w", err)
	}
	if err := zipFile(zw, "manifest.json", mj); err != nil {
		return err
	}
	if err := zw.Close(); err != nil {
		return fmt.Errorf("web: report zip: %w", err)
	}
	if err := s.store.Audit(r.Context(), s.actor(r), "report.download", "progress_report", rf.hist.Today.String(), nil,
		map[string]any{"query": rf.cq.values().Encode(), "sha256": sha256Hex(buf.Bytes()), "files": man.Files}); err != nil {
		return err
	}
	return sendZip(w, "cohortdesk-weekly-report-"+rf.hist.Today.String()+".zip", buf.Bytes())
}
