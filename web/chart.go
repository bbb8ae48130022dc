package web

import (
	"encoding/json"
	"fmt"

	"cohortdesk/assets"
	"cohortdesk/views/components"

	"github.com/go-echarts/go-echarts/v2/opts"
)

// echartsChart is the part of a go-echarts chart we use.
type echartsChart interface {
	Validate()
	JSON() map[string]interface{}
	GetAssets() opts.Assets
}

// chartInit is the initialisation every chart gets: the chart library loads from
// our own assets path, never from another host, and draws as SVG so printouts
// stay sharp.
func chartInit(id string) opts.Initialization {
	return opts.Initialization{
		ChartID:    id,
		AssetsHost: assets.Dir("vendor/echarts/echarts.min.js"),
		Renderer:   "svg",
		Theme:      "white",
	}
}

// chartView turns a go-echarts chart into the view model our script draws, in
// the app's colours (themeChart), and the script URLs the page must load for
// it (all under /assets/).
func chartView(id, label string, c echartsChart, tall bool) (components.ChartModel, []string, error) {
	c.Validate()
	raw, err := json.Marshal(c.JSON())
	if err != nil {
		return components.ChartModel{}, nil, fmt.Errorf("web: chart %s: %w", id, err)
	}
	var o map[string]any
	if err := json.Unmarshal(raw, &o); err != nil {
		return components.ChartModel{}, nil, fmt.Errorf("web: chart %s: %w", id, err)
	}
	themeChart(o)
	b, err := json.Marshal(o)
	if err != nil {
		return components.ChartModel{}, nil, fmt.Errorf("web: chart %s: %w", id, err)
	}
	a := c.GetAssets()
	var scripts []string
	for _, js := range a.JSAssets.Values {
		// The library is told our host; accept nothing else.
		want := assets.Dir("vendor/echarts/echarts.min.js")
		if len(js) < len(want) || js[:len(want)] != want {
			js = want + js
		}
		if js != assets.URL("vendor/echarts/echarts.min.js") {
			return components.ChartModel{}, nil, fmt.Errorf("web: chart %s wants asset %s that we do not serve", id, js)
		}
		scripts = append(scripts, js)
	}
	return components.ChartModel{ID: id, Options: string(b), Tall: tall, Label: label}, scripts, nil
}
