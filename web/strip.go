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
		m.Rows = append(m.Rows, components.StripRowView{
			TopMM:       r.TopMM,
			HeightMM:    l.Options.RowHeightMM,
			Trace:       ecg.PathD(r.Trace),
			Calibration: ecg.PathD(r.Calibration),
			Beats:       r.Beats,
			Label:       fmt.Sprintf("%.0f–%.0f s", r.StartSeconds, r.StartSeconds+l.Options.RowSeconds),
		})
	}
	return m
}
