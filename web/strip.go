package web

import (
	"fmt"

	"cohortdesk/cohort/ecg"
	"cohortdesk/views/components"
)

// stripView turns a strip layout from cohort/ecg into the view model of the
// SVG component.
func stripView(id string, l ecg.StripLayout, caption string) components.StripModel {
	o := l.Options
	m := components.StripModel{ID: id, WidthMM: l.WidthMM, HeightMM: l.HeightMM, Caption: caption,
		Paper: components.StripPaper{SpeedMMPerS: o.SpeedMMPerS, GainMMPerMV: o.GainMMPerMV, RowHeightMM: o.RowHeightMM, RowSeconds: o.RowSeconds, MarginMM: o.MarginMM}}
	for _, r := range l.Rows {
		row := components.StripRowView{
			TopMM:       r.TopMM,
			HeightMM:    l.Options.RowHeightMM,
			Trace:       ecg.PathD(r.Trace),
			Calibration: ecg.PathD(r.Calibration),
			Beats:       r.Beats,
			Premature:   r.Premature,
			Label:       fmt.Sprintf("%.0f–%.0f s", r.StartSeconds, r.StartSeconds+l.Options.RowSeconds),
		}
		for _, sh := range r.Shaded {
			row.Shaded = append(row.Shaded, components.ShadeView{X: sh.X0, W: sh.X1 - sh.X0, Label: "excluded: " + sh.Kind.Label()})
		}
		m.Rows = append(m.Rows, row)
	}
	return m
}
