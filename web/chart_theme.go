package web

import (
	"github.com/go-echarts/go-echarts/v2/charts"
	"github.com/go-echarts/go-echarts/v2/opts"
)

// Chart colours. A series says what it means, and each meaning has one
// colour on every chart. The colours themselves are the stylesheet's tokens
// (assets/css/charts.css, built on app.css's palette): a chart's options
// carry "var(--chart-...)" and assets/js/charts.js puts the stylesheet's
// value in before the chart is drawn, so a colour is changed in one place.
type chartMeaning string

// The meanings.
const (
	// chartPositive: screen-positive weeks, irregular windows, flags.
	chartPositive chartMeaning = "positive"
	// chartNegative: screen-negative weeks.
	chartNegative chartMeaning = "negative"
	// chartThreshold: a threshold, limit or target to compare with; dashed.
	chartThreshold chartMeaning = "threshold"
	// chartBand: the bounds of a confidence band or interval; thin, dashed.
	chartBand chartMeaning = "band"
	// chartMeasure: the figure the chart is about (heart rate, an estimate,
	// a share).
	chartMeasure chartMeaning = "measure"
	// chartMeasure2: a second figure on the same chart.
	chartMeasure2 chartMeaning = "measure-2"
	// chartTotal: a total over groups drawn beside the groups.
	chartTotal chartMeaning = "total"
)

// chartToken is the stylesheet token of a colour, as the options carry it.
func chartToken(name string) string { return "var(--chart-" + name + ")" }

// chartColour is the token of a meaning's colour.
func chartColour(m chartMeaning) string { return chartToken(string(m)) }

// chartGroups are the colours of groups that have no meaning of their own
// (sites), in order; more groups than colours reuse them.
const chartGroups = 4

// chartGroupColour is the colour of the i-th group.
func chartGroupColour(i int) string { return chartToken("group-" + string(rune('1'+i%chartGroups))) }

// paint is the series options that draw a series in its meaning's colour
// and line: solid for figures, dashed for thresholds, thin and dashed for a
// band's bounds.
func paint(m chartMeaning) []charts.SeriesOpts {
	c := chartColour(m)
	line := opts.LineStyle{Color: c, Width: 2}
	switch m {
	case chartThreshold:
		line.Type, line.Width = "dashed", 1.5
	case chartBand:
		line.Type, line.Width = "dashed", 1
	}
	return []charts.SeriesOpts{charts.WithLineStyleOpts(line), charts.WithItemStyleOpts(opts.ItemStyle{Color: c, BorderColor: c})}
}

// paintGroup draws the i-th group's series.
func paintGroup(i int) []charts.SeriesOpts {
	c := chartGroupColour(i)
	return []charts.SeriesOpts{charts.WithLineStyleOpts(opts.LineStyle{Color: c, Width: 2}), charts.WithItemStyleOpts(opts.ItemStyle{Color: c, BorderColor: c})}
}

// with joins series options, so a series can take its colour and other
// options together.
func with(o ...[]charts.SeriesOpts) []charts.SeriesOpts {
	var out []charts.SeriesOpts
	for _, x := range o {
		out = append(out, x...)
	}
	return out
}

// themeChart dresses a chart's options (as decoded JSON) in the app's look:
// the palette for any series left without a colour, text, axes, tooltip,
// legend and zoom control in the stylesheet's colours. Options a chart set
// itself are kept.
func themeChart(o map[string]any) {
	ink, soft, rule, ruleSoft, card := chartToken("ink"), chartToken("ink-soft"), chartToken("rule"), chartToken("rule-soft"), chartToken("card")
	palette := []any{chartColour(chartMeasure), chartColour(chartMeasure2)}
	for i := range chartGroups {
		palette = append(palette, chartGroupColour(i))
	}
	o["color"] = palette
	o["backgroundColor"] = "transparent"
	o["textStyle"] = map[string]any{"color": ink, "fontFamily": chartToken("font")}
	axis := map[string]any{
		"axisLine":      map[string]any{"lineStyle": map[string]any{"color": rule}},
		"axisTick":      map[string]any{"lineStyle": map[string]any{"color": rule}},
		"axisLabel":     map[string]any{"color": soft},
		"splitLine":     map[string]any{"lineStyle": map[string]any{"color": ruleSoft}},
		"nameTextStyle": map[string]any{"color": soft},
	}
	for _, k := range []string{"xAxis", "yAxis"} {
		eachObject(o[k], func(a map[string]any) { fill(a, axis) })
	}
	eachObject(o["tooltip"], func(t map[string]any) {
		fill(t, map[string]any{"backgroundColor": card, "borderColor": rule, "textStyle": map[string]any{"color": ink}})
	})
	eachObject(o["legend"], func(l map[string]any) {
		fill(l, map[string]any{
			"icon": "roundRect", "itemWidth": 16, "itemHeight": 6, "itemGap": 18,
			"textStyle": map[string]any{"color": ink, "fontSize": 12}, "inactiveColor": rule,
		})
	})
	// A zoom control sits above the legend at the foot of the chart, never
	// on it, with the plot above both.
	slider := false
	eachObject(o["dataZoom"], func(z map[string]any) { slider = slider || z["type"] == "slider" })
	if slider {
		eachObject(o["legend"], func(l map[string]any) { l["bottom"] = 0 })
		if _, ok := o["grid"].(map[string]any); !ok {
			o["grid"] = map[string]any{"bottom": 78}
		}
	}
	eachObject(o["dataZoom"], func(z map[string]any) {
		if z["type"] != "slider" {
			return
		}
		fill(z, map[string]any{
			"height": 22, "bottom": 30,
			"borderColor": rule, "backgroundColor": card, "fillerColor": chartToken("zoom-fill"),
			"handleStyle":     map[string]any{"color": card, "borderColor": chartToken("zoom-handle"), "borderWidth": 1.5},
			"moveHandleStyle": map[string]any{"color": chartToken("zoom-handle")},
			"textStyle":       map[string]any{"color": soft},
			"dataBackground":  map[string]any{"lineStyle": map[string]any{"color": soft}, "areaStyle": map[string]any{"color": ruleSoft}},
			"selectedDataBackground": map[string]any{
				"lineStyle": map[string]any{"color": chartToken("zoom-handle")}, "areaStyle": map[string]any{"color": chartToken("zoom-fill")},
			},
			"emphasis": map[string]any{"handleStyle": map[string]any{"borderColor": ink}, "moveHandleStyle": map[string]any{"color": ink}},
		})
	})
}

// eachObject calls f with v when it is an object, or with each object of v
// when it is a list (ECharts takes either for axes, legends and zooms).
func eachObject(v any, f func(map[string]any)) {
	switch x := v.(type) {
	case map[string]any:
		f(x)
	case []any:
		for _, e := range x {
			if m, ok := e.(map[string]any); ok {
				f(m)
			}
		}
	}
}

// fill sets the keys of def that o lacks, descending into objects both have.
func fill(o, def map[string]any) {
	for k, v := range def {
		cur, ok := o[k]
		if !ok {
			o[k] = v
			continue
		}
		cm, ok1 := cur.(map[string]any)
		dm, ok2 := v.(map[string]any)
		if ok1 && ok2 {
			fill(cm, dm)
		}
	}
}
