package referral

import (
	"math"
	"strconv"
)

// ChartLayout is the heart-rate chart placed in millimetres, Y growing
// downwards, so the HTML (SVG) and the PDF draw the same figure.
type ChartLayout struct {
	WidthMM, HeightMM        float64
	Left, Top, Right, Bottom float64 // the plot area
	Bars                     []Bar   // one per bin: lowest to highest rate
	Shades                   []Box   // irregular windows
	YTicks, XTicks           []Tick
	LowBPM, HighBPM          int // the Y range
}

// Bar is a vertical line from Y1 to Y2 at X.
type Bar struct{ X, Y1, Y2 float64 }

// Box is a band across the plot's height from X, W wide.
type Box struct{ X, W float64 }

// Tick is a grid line at a position with its label.
type Tick struct {
	At    float64
	Label string
}

// Chart margins in millimetres: room for the tick labels.
const (
	chartLeftMM   = 12
	chartRightMM  = 2
	chartTopMM    = 3
	chartBottomMM = 7
)

// Layout places the heart-rate bins in a chart of the given size. The rate
// axis runs in steps of 20 bpm over the data, at least 40-140 bpm; the time
// axis is the week with a line at each study day.
func (h HeartRateView) Layout(widthMM, heightMM float64) ChartLayout {
	l := ChartLayout{WidthMM: widthMM, HeightMM: heightMM, Left: chartLeftMM, Top: chartTopMM,
		Right: widthMM - chartRightMM, Bottom: heightMM - chartBottomMM, LowBPM: 40, HighBPM: 140}
	for _, b := range h.Bins {
		l.LowBPM = min(l.LowBPM, int(math.Floor(float64(b.Min)/20))*20)
		l.HighBPM = max(l.HighBPM, int(math.Ceil(float64(b.Max)/20))*20)
	}
	minutes := float64(max(h.Minutes, 1))
	x := func(m float64) float64 { return l.Left + (l.Right-l.Left)*m/minutes }
	y := func(bpm float64) float64 {
		return l.Bottom - (l.Bottom-l.Top)*(bpm-float64(l.LowBPM))/float64(l.HighBPM-l.LowBPM)
	}
	for bpm := l.LowBPM; bpm <= l.HighBPM; bpm += 20 {
		l.YTicks = append(l.YTicks, Tick{At: y(float64(bpm)), Label: strconv.Itoa(bpm)})
	}
	for d := 0; d*1440 <= h.Minutes; d++ {
		label := ""
		if d*1440 < h.Minutes {
			label = "day " + strconv.Itoa(h.FirstStudyDay+d)
		}
		l.XTicks = append(l.XTicks, Tick{At: x(float64(d * 1440)), Label: label})
	}
	for _, s := range h.Irregular {
		l.Shades = append(l.Shades, Box{X: x(float64(s.From)), W: x(float64(s.To)) - x(float64(s.From))})
	}
	bin := float64(max(h.BinMinutes, 1))
	for _, b := range h.Bins {
		y1, y2 := y(float64(b.Max)), y(float64(b.Min))
		if y2-y1 < 0.3 {
			y1, y2 = y1-0.15, y2+0.15 // a bin of one rate still shows
		}
		l.Bars = append(l.Bars, Bar{X: x(float64(b.Minute) + bin/2), Y1: y1, Y2: y2})
	}
	return l
}
