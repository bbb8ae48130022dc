package web

import (
	"encoding/json"
	"html"
	"os"
	"regexp"
	"slices"
	"strings"
	"testing"
	"time"

	"cohortdesk/cohort"
)

// chartPages are the pages with charts, from the accessibility fixture.
func chartPages(t *testing.T, a *app) map[string]string {
	t.Helper()
	out := map[string]string{}
	for _, p := range a11yFixture(t, a) {
		switch p.name {
		case "participant page", "progress", "statistics", "threshold sweep":
			out[p.name] = p.path
		}
	}
	if len(out) != 4 {
		t.Fatalf("chart pages %v: want four", out)
	}
	return out
}

var dataChartRE = regexp.MustCompile(`data-chart="([^"]*)"`)

// chartOptions reads the options of every chart on a page.
func chartOptions(t *testing.T, body string) []map[string]any {
	t.Helper()
	var out []map[string]any
	for _, m := range dataChartRE.FindAllStringSubmatch(body, -1) {
		var o map[string]any
		if err := json.Unmarshal([]byte(html.UnescapeString(m[1])), &o); err != nil {
			t.Fatalf("chart options: %v", err)
		}
		out = append(out, o)
	}
	return out
}

// colourKeys are the option keys whose values are colours.
var colourKeys = map[string]bool{"color": true, "borderColor": true, "backgroundColor": true, "fillerColor": true, "inactiveColor": true}

// colours walks options and calls f with the path and value of every colour.
func colours(v any, path string, f func(path, value string)) {
	switch x := v.(type) {
	case map[string]any:
		for k, e := range x {
			if s, ok := e.(string); ok && colourKeys[k] {
				f(path+"."+k, s)
			} else if l, ok := e.([]any); ok && k == "color" {
				for _, c := range l {
					if s, ok := c.(string); ok {
						f(path+".color[]", s)
					}
				}
			} else {
				colours(e, path+"."+k, f)
			}
		}
	case []any:
		for _, e := range x {
			colours(e, path+"[]", f)
		}
	}
}

// seriesMeaning is what a series' name says it shows, for the series whose
// meaning has a fixed colour on every chart.
func seriesMeaning(name string) (chartMeaning, bool) {
	n := strings.ToLower(name)
	switch {
	case strings.Contains(n, "95%"):
		return chartBand, true
	case strings.Contains(n, "threshold") || strings.Contains(n, "target"):
		return chartThreshold, true
	case strings.Contains(n, "flagged") || strings.Contains(n, "screen-positive"):
		return chartPositive, true
	case strings.Contains(n, "negative"):
		return chartNegative, true
	}
	return "", false
}

// TestChartsWearTheStylesheetColours: on every page with charts, every
// colour in a chart's options is a token of the stylesheet's chart colours
// (assets/css/charts.css defines each one), never a literal colour and never
// the chart library's own palette; every series has its colour set; series
// that show a screen-positive flag, a negative week, a threshold or a
// confidence band have that meaning's colour on every chart; and the legend
// and the zoom control are dressed in the same tokens.
func TestChartsWearTheStylesheetColours(t *testing.T) {
	css, err := os.ReadFile("../assets/css/charts.css")
	if err != nil {
		t.Fatal(err)
	}
	defined := map[string]bool{}
	for _, m := range regexp.MustCompile(`(--chart-[a-z0-9-]+)\s*:`).FindAllStringSubmatch(string(css), -1) {
		defined[m[1]] = true
	}
	tokenRE := regexp.MustCompile(`^var\((--chart-[a-z0-9-]+)\)$`)
	a := newApp(t)
	pages := chartPages(t, a)
	c := a.signIn(cohort.Investigator)
	meanings := map[chartMeaning]int{}
	legends, zooms, charts := 0, 0, 0
	for name, path := range pages {
		_, body := a.get(c, path)
		for _, o := range chartOptions(t, body) {
			charts++
			colours(o, name, func(at, v string) {
				if v == "transparent" {
					return
				}
				m := tokenRE.FindStringSubmatch(v)
				if m == nil {
					t.Errorf("%s: colour %q is not a stylesheet token", at, v)
				} else if !defined[m[1]] {
					t.Errorf("%s: token %s is not defined in assets/css/charts.css", at, m[1])
				}
			})
			series, _ := o["series"].([]any)
			for _, s := range series {
				sm := s.(map[string]any)
				sname, _ := sm["name"].(string)
				var got string
				for _, k := range []string{"itemStyle", "lineStyle"} {
					if st, ok := sm[k].(map[string]any); ok {
						for _, ck := range []string{"color", "borderColor"} {
							if c, _ := st[ck].(string); c != "" && c != "transparent" && got == "" {
								got = c
							}
						}
					}
				}
				if got == "" {
					t.Errorf("%s: series %q has no colour of its own", name, sname)
				}
				if want, ok := seriesMeaning(sname); ok {
					meanings[want]++
					if got != chartColour(want) {
						t.Errorf("%s: series %q is drawn in %s, want %s, the colour of %s on every chart", name, sname, got, chartColour(want), want)
					}
				}
			}
			eachObject(o["legend"], func(l map[string]any) {
				legends++
				if ts, _ := l["textStyle"].(map[string]any); ts == nil || ts["color"] != chartToken("ink") || l["icon"] != "roundRect" {
					t.Errorf("%s: legend not in the app's look: %v", name, l)
				}
			})
			eachObject(o["dataZoom"], func(z map[string]any) {
				if z["type"] != "slider" {
					return
				}
				zooms++
				if z["fillerColor"] != chartToken("zoom-fill") || z["borderColor"] != chartToken("rule") {
					t.Errorf("%s: zoom control not in the app's look: %v", name, z)
				}
			})
		}
	}
	for _, m := range []chartMeaning{chartPositive, chartNegative, chartThreshold, chartBand} {
		if meanings[m] == 0 {
			t.Errorf("no chart shows a %s series: the fixed meaning is not checked", m)
		}
	}
	if charts < 6 || legends < 3 || zooms < 1 {
		t.Errorf("%d charts, %d legends, %d zoom controls checked: are the pages there?", charts, legends, zooms)
	}
}

// echartsPalette is the chart library's own default series palette (from
// the vendored library's source, assets/vendor/echarts), which our charts
// must not show.
var echartsPalette = []string{"#5070dd", "#b6d634", "#505372", "#ff994d", "#0ca8df", "#ffd10a", "#fb628b", "#785db0", "#3fbe95"}

// TestBrowserChartsDrawInTheStylesheetColours draws the charts of the
// statistics and participant pages in headless Chromium and reads the
// colours of the drawn SVG: the stylesheet's values of the measure, band,
// threshold and positive tokens are there, the library's default palette is
// not.
func TestBrowserChartsDrawInTheStylesheetColours(t *testing.T) {
	for _, c := range echartsPalette {
		b, _ := os.ReadFile("../assets/vendor/echarts/echarts.min.js")
		if !strings.Contains(strings.ToLower(string(b)), c) {
			t.Fatalf("%s is not in the vendored chart library: the palette above is out of date", c)
		}
	}
	a := newApp(t)
	pages := chartPages(t, a)
	tb := newTab(t, a, 120*time.Second)
	tb.signIn(cohort.Investigator)
	palette, _ := json.Marshal(echartsPalette)
	drawn := `((palette) => {
		const s = getComputedStyle(document.documentElement);
		const probe = document.createElement('span'); document.body.appendChild(probe);
		const norm = c => { probe.style.color = ''; probe.style.color = c; return getComputedStyle(probe).color; };
		const tokens = {};
		for (const n of ['positive', 'negative', 'threshold', 'band', 'measure']) tokens[n] = norm(s.getPropertyValue('--chart-' + n).trim());
		const used = new Set();
		for (const el of document.querySelectorAll('[data-chart] svg *')) {
			// What is painted, not what the attribute says.
			const cs = getComputedStyle(el);
			for (const v of [cs.fill, cs.stroke]) {
				if (v && v !== 'none' && !v.startsWith('url(')) used.add(v);
			}
		}
		const defaults = palette.map(norm).filter(c => used.has(c));
		probe.remove();
		return JSON.stringify({tokens, used: [...used], defaults});
	})(` + string(palette) + `)`
	type result struct {
		Tokens   map[string]string `json:"tokens"`
		Used     []string          `json:"used"`
		Defaults []string          `json:"defaults"`
	}
	seen := map[string]bool{}
	for _, name := range []string{"statistics", "participant page", "threshold sweep"} {
		tb.open(pages[name], `[data-chart][data-drawn] svg`)
		var r result
		if err := json.Unmarshal([]byte(tb.eval(drawn)), &r); err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		if len(r.Defaults) > 0 {
			t.Errorf("%s: charts are drawn in the chart library's default colours %v", name, r.Defaults)
		}
		for n, v := range r.Tokens {
			if v == "" {
				t.Fatalf("%s: the stylesheet does not define --chart-%s", name, n)
			}
			if slices.Contains(r.Used, v) {
				seen[n] = true
			}
		}
	}
	for _, n := range []string{"positive", "negative", "threshold", "band", "measure"} {
		if !seen[n] {
			t.Errorf("no chart is drawn in the colour of --chart-%s", n)
		}
	}
}
