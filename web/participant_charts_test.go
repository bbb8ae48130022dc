package web

import (
	"context"
	"encoding/json"
	"fmt"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"
)

// chartOption is the part of a drawn chart's options these tests read. The
// library takes a component as one object or a list of them; both are read
// as a list.
type chartOption struct {
	UseUTC bool
	Legend []struct {
		Show *bool `json:"show"`
	}
	XAxis []struct {
		Name string  `json:"name"`
		Min  float64 `json:"min"`
	}
	YAxis []struct {
		Name string  `json:"name"`
		Max  float64 `json:"max"`
	}
	Series []struct {
		Name string `json:"name"`
		Data []any  `json:"data"`
	}
}

func (o *chartOption) UnmarshalJSON(b []byte) error {
	var raw map[string]json.RawMessage
	if err := json.Unmarshal(b, &raw); err != nil {
		return err
	}
	list := func(key string, dst any) error {
		v := raw[key]
		if len(v) == 0 {
			return nil
		}
		if v[0] == '{' {
			v = append(append([]byte("["), v...), ']')
		}
		return json.Unmarshal(v, dst)
	}
	if v, ok := raw["useUTC"]; ok {
		if err := json.Unmarshal(v, &o.UseUTC); err != nil {
			return err
		}
	}
	for key, dst := range map[string]any{"legend": &o.Legend, "xAxis": &o.XAxis, "yAxis": &o.YAxis, "series": &o.Series} {
		if err := list(key, dst); err != nil {
			return fmt.Errorf("%s: %w", key, err)
		}
	}
	return nil
}

// TestParticipantChartsShowWhatDecided opens, in the browser, the page of a
// demo participant with screen-positive weeks who lives outside UTC:
//   - the weekly chart draws what decides a flag, the longest run of
//     irregular windows against the run that flags a week and the share of
//     irregular windows on an axis scaled to the shares (not 0-100), with the
//     flagged weeks, and only those, in the flagged series;
//   - the heart-rate chart's times are the participant's (its axis starts at
//     the participant's midnight and says whose time it is, whatever the
//     browser's zone) and it has no legend to lie over its zoom control;
//   - the "why" of each week is in plain words, without "0 of 0".
func TestParticipantChartsShowWhatDecided(t *testing.T) {
	a := newApp(t)
	loadDemo(t, a, 60)
	ctx := context.Background()
	var pid int64
	var zone string
	err := a.store.Pool().QueryRow(ctx, `
		SELECT p.id, p.time_zone FROM participants p JOIN screen_results sr ON sr.participant_id = p.id
		JOIN protocols pr ON pr.id = sr.protocol_id AND pr.active
		WHERE sr.verdict = 'positive' AND p.time_zone <> 'UTC'
		GROUP BY p.id ORDER BY count(*) DESC, p.id LIMIT 1`).Scan(&pid, &zone)
	if err != nil {
		t.Fatalf("no screen-positive participant outside UTC in the demo: %v", err)
	}
	tb := newTab(t, a, 2*time.Minute)
	tb.signIn(cohort.Coordinator)
	tb.open(fmt.Sprintf("/participants/%d", pid), `[data-testid="chart-trend-chart"] svg`)

	option := func(id string) chartOption {
		var o chartOption
		if err := json.Unmarshal([]byte(tb.eval(`document.querySelector('[data-testid="chart-`+id+`"]').dataset.chart`)), &o); err != nil {
			t.Fatalf("%s options: %v", id, err)
		}
		return o
	}
	positive := map[string]bool{}
	for _, row := range strings.Split(tb.eval(`Array.from(document.querySelectorAll('[data-testid="timeline"] tbody tr')).map(tr => tr.children[0].textContent.trim() + '|' + tr.children[4].textContent.trim() + '|' + tr.children[5].textContent.trim()).join('\n')`), "\n") {
		f := strings.SplitN(row, "|", 3)
		if len(f) < 3 {
			continue
		}
		if f[1] == "positive" {
			positive["week "+f[0]] = true
			if !strings.HasPrefix(f[2], "Flagged") {
				t.Errorf("week %s is positive; its why reads %q", f[0], f[2])
			}
		}
		if strings.Contains(f[2], "0 of 0") || strings.Count(f[2], ";") > 3 {
			t.Errorf("week %s: why %q", f[0], f[2])
		}
	}
	if len(positive) == 0 {
		t.Fatal("the timeline shows no positive week")
	}

	trend := option("trend-chart")
	var weeks []string
	for _, x := range strings.Split(tb.eval(`JSON.stringify(JSON.parse(document.querySelector('[data-testid="chart-trend-chart"]').dataset.chart).xAxis[0].data)`), ",") {
		weeks = append(weeks, strings.Trim(x, `[]"`))
	}
	var flaggedSeries, limit bool
	for _, s := range trend.Series {
		switch {
		case strings.HasPrefix(s.Name, "longest irregular run, week flagged"):
			flaggedSeries = true
			for i, v := range s.Data {
				drawn := v != "-" && v != nil
				if s, ok := v.(map[string]any); ok {
					drawn = s["value"] != "-"
				}
				if i < len(weeks) && drawn != positive[weeks[i]] {
					t.Errorf("%s: in the flagged series %v, positive %v", weeks[i], drawn, positive[weeks[i]])
				}
			}
		case strings.HasPrefix(s.Name, "run that flags a week"):
			limit = true
		case strings.Contains(s.Name, "mean MASD") || strings.Contains(s.Name, "Mean MASD"):
			t.Errorf("the weekly chart still draws %q", s.Name)
		}
	}
	if !flaggedSeries || !limit {
		t.Errorf("the weekly chart does not draw the run against its limit with the flagged weeks marked: %+v", trend.Series)
	}
	if len(trend.YAxis) < 2 || trend.YAxis[1].Max >= 100 {
		t.Errorf("the share of irregular windows is drawn on a 0-100 scale: %+v", trend.YAxis)
	}
	if !strings.Contains(tb.eval(`document.querySelector('[data-testid="chart-trend-chart"] svg').textContent`), "run that flags a week") {
		t.Error("the weekly chart's legend does not name the limit")
	}

	hr := option("hr-chart")
	if !hr.UseUTC || len(hr.XAxis) == 0 || !strings.Contains(hr.XAxis[0].Name, zone) {
		t.Errorf("the heart-rate chart does not draw the participant's time (%s): useUTC %v, axis %+v", zone, hr.UseUTC, hr.XAxis)
	}
	if len(hr.XAxis) > 0 && int64(hr.XAxis[0].Min)%(24*3600*1000) != 0 {
		t.Errorf("the heart-rate axis starts at %s on the chart's clock, not at the participant's midnight",
			time.UnixMilli(int64(hr.XAxis[0].Min)).UTC().Format(time.RFC3339))
	}
	if len(hr.Legend) == 0 || hr.Legend[0].Show == nil || *hr.Legend[0].Show {
		t.Errorf("the heart-rate chart has a legend over its zoom control: %+v", hr.Legend)
	}
}
