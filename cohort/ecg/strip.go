package ecg

import (
	"math"
	"slices"
	"strconv"
)

// ECG paper. 25 mm/s and 10 mm/mV with 1 mm and 5 mm squares are common
// practice (Kligfield P et al. Recommendations for the standardization and
// interpretation of the electrocardiogram, part I. Circulation
// 2007;115:1306-24; from memory).
const (
	PaperSpeedMMPerS = 25.0
	PaperGainMMPerMV = 10.0
	PaperMinorMM     = 1.0
	PaperMajorMM     = 5.0
)

// The calibration pulse: 1 mV for 200 ms, drawn at the start of every row so a
// reader can check the scale of a printed or zoomed strip.
const (
	calMV      = 1.0
	calSeconds = 0.2
)

// StripOptions shape a strip. Zero fields take the defaults of
// DefaultStripOptions.
type StripOptions struct {
	SpeedMMPerS float64 // paper speed; 25
	GainMMPerMV float64 // amplitude scale; 10
	RowSeconds  float64 // time per row; 10 (250 mm at 25 mm/s)
	RowHeightMM float64 // height of a row, baseline in the middle; 30
	StepMM      float64 // decimation step along the time axis; 0.2
	MarginMM    float64 // left margin holding the calibration pulse; 10
}

// DefaultStripOptions is standard paper in 10 s rows of 30 mm.
func DefaultStripOptions() StripOptions {
	return StripOptions{
		SpeedMMPerS: PaperSpeedMMPerS,
		GainMMPerMV: PaperGainMMPerMV,
		RowSeconds:  10,
		RowHeightMM: 30,
		StepMM:      0.2,
		MarginMM:    10,
	}
}

func (o StripOptions) withDefaults() StripOptions {
	d := DefaultStripOptions()
	pick := func(v, dflt float64) float64 {
		if v > 0 && !math.IsInf(v, 0) {
			return v
		}
		return dflt
	}
	o.SpeedMMPerS = pick(o.SpeedMMPerS, d.SpeedMMPerS)
	o.GainMMPerMV = pick(o.GainMMPerMV, d.GainMMPerMV)
	o.RowSeconds = pick(o.RowSeconds, d.RowSeconds)
	o.RowHeightMM = pick(o.RowHeightMM, d.RowHeightMM)
	o.StepMM = pick(o.StepMM, d.StepMM)
	o.MarginMM = pick(o.MarginMM, d.MarginMM)
	o.MarginMM = math.Max(o.MarginMM, calSeconds*o.SpeedMMPerS)
	return o
}

// Point is a position on the strip in millimetres; Y grows downwards, as in
// SVG.
type Point struct{ X, Y float64 }

// StripRow is one row of the strip, in the strip's coordinates.
type StripRow struct {
	StartSeconds float64 // time of the row's first sample after the recording start
	TopMM        float64 // upper edge of the row
	BaselineMM   float64 // the row's centre line, where its median voltage is drawn
	// Trace is the waveform as a polyline. Where a 0.2 mm step spans several
	// samples only the lowest and highest are kept, in time order, so no
	// peak is lost however far the data are thinned.
	Trace []Point
	// Beats are the x positions of the detected beats in this row.
	Beats []float64
	// Calibration is the 1 mV, 200 ms pulse at the row start.
	Calibration []Point
	// Clipped counts trace points held at the row's edge because the signal
	// went beyond it.
	Clipped int
	// Shaded are the unusable stretches within this row (see Mark).
	Shaded []Shade
	// Premature are the x positions of the premature beats in this row, a
	// subset of Beats (see Mark).
	Premature []float64
}

// Shade is an unusable stretch on a row, from X0 to X1 in millimetres.
type Shade struct {
	X0, X1 float64
	Kind   Artefact
}

// StripLayout is a waveform laid out on ECG paper, ready to draw.
type StripLayout struct {
	Options  StripOptions // the options in force, defaults filled in
	MinorMM  float64      // small grid square
	MajorMM  float64      // large grid square
	WidthMM  float64      // margin plus one row of trace
	HeightMM float64      // all rows
	Rows     []StripRow
}

// Layout places w on ECG paper in rows of opts.RowSeconds. Each row is centred
// on its median voltage, so an electrode offset or slow drift does not push
// the trace out of its row; what still leaves the row is clipped at its edge
// and counted. beats are sample indices into w.Samples (Detection.Beats).
func Layout(w Waveform, beats []int, opts StripOptions) StripLayout {
	o := opts.withDefaults()
	l := StripLayout{
		Options: o,
		MinorMM: PaperMinorMM,
		MajorMM: PaperMajorMM,
		WidthMM: o.MarginMM + o.RowSeconds*o.SpeedMMPerS,
	}
	n := len(w.Samples)
	fs := w.RateHz
	if n == 0 || !(fs > 0) || math.IsInf(fs, 0) {
		return l
	}
	perRow := o.RowSeconds * fs
	rows := int(math.Ceil(float64(n)/perRow - 1e-9))
	l.HeightMM = float64(rows) * o.RowHeightMM
	sorted := slices.Clone(beats)
	slices.Sort(sorted)
	perStep := o.StepMM / o.SpeedMMPerS * fs // samples per decimation step

	for r := range rows {
		i0 := int(math.Round(float64(r) * perRow))
		i1 := min(n, int(math.Round(float64(r+1)*perRow)))
		row := StripRow{
			StartSeconds: float64(i0) / fs,
			TopMM:        float64(r) * o.RowHeightMM,
		}
		row.BaselineMM = row.TopMM + o.RowHeightMM/2
		med := median(w.Samples[i0:i1])
		x := func(i int) float64 { return o.MarginMM + float64(i-i0)/fs*o.SpeedMMPerS }
		y := func(v float64) float64 {
			yy := row.BaselineMM - (v-med)*o.GainMMPerMV
			if math.IsNaN(yy) || yy < row.TopMM || yy > row.TopMM+o.RowHeightMM {
				row.Clipped++
				if math.IsNaN(yy) {
					return row.BaselineMM
				}
				return math.Max(row.TopMM, math.Min(row.TopMM+o.RowHeightMM, yy))
			}
			return yy
		}
		if perStep <= 1 {
			row.Trace = make([]Point, 0, i1-i0)
			for i := i0; i < i1; i++ {
				row.Trace = append(row.Trace, Point{x(i), y(w.Samples[i])})
			}
		} else {
			steps := int(math.Ceil(float64(i1-i0) / perStep))
			row.Trace = make([]Point, 0, 2*steps)
			for s := range steps {
				b0 := i0 + int(math.Round(float64(s)*perStep))
				b1 := min(i1, i0+int(math.Round(float64(s+1)*perStep)))
				if b0 >= b1 {
					continue
				}
				lo, hi := b0, b0
				for i := b0 + 1; i < b1; i++ {
					if w.Samples[i] < w.Samples[lo] {
						lo = i
					}
					if w.Samples[i] > w.Samples[hi] {
						hi = i
					}
				}
				first, second := min(lo, hi), max(lo, hi)
				row.Trace = append(row.Trace, Point{x(first), y(w.Samples[first])})
				if second != first {
					row.Trace = append(row.Trace, Point{x(second), y(w.Samples[second])})
				}
			}
		}
		for _, b := range sorted {
			if b >= i0 && b < i1 {
				row.Beats = append(row.Beats, x(b))
			}
		}
		cw := calSeconds * o.SpeedMMPerS
		ch := calMV * o.GainMMPerMV
		c0 := (o.MarginMM - cw) / 2
		by := row.BaselineMM
		row.Calibration = []Point{{0, by}, {c0, by}, {c0, by - ch}, {c0 + cw, by - ch}, {c0 + cw, by}, {o.MarginMM, by}}
		l.Rows = append(l.Rows, row)
	}
	return l
}

// median of x without changing x; 0 for no data.
func median(x []float64) float64 {
	if len(x) == 0 {
		return 0
	}
	c := slices.Clone(x)
	slices.Sort(c)
	m := len(c) / 2
	if len(c)%2 == 1 {
		return c[m]
	}
	return (c[m-1] + c[m]) / 2
}

// PathD turns a polyline into SVG path data, "M x,y L x,y x,y ...", with two
// decimals (0.01 mm, far below a printer's dot) and no spaces that SVG does
// not need. An empty polyline gives "".
func PathD(points []Point) string {
	if len(points) == 0 {
		return ""
	}
	b := make([]byte, 0, len(points)*14+2)
	num := func(v float64) {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			v = 0
		}
		v = math.Round(v*100) / 100
		if v == 0 {
			v = 0 // no "-0.00"
		}
		b = strconv.AppendFloat(b, v, 'f', 2, 64)
	}
	for i, p := range points {
		switch i {
		case 0:
			b = append(b, 'M')
		case 1:
			b = append(b, 'L')
		default:
			b = append(b, ' ')
		}
		num(p.X)
		b = append(b, ',')
		num(p.Y)
	}
	return string(b)
}

// Mark adds to a layout of a waveform at rateHz the unusable stretches of q
// (shaded) and the premature beats (indices into beats, the sample indices
// the layout was made with), row by row.
func Mark(l StripLayout, rateHz float64, q *Quality, beats, premature []int) StripLayout {
	o := l.Options
	if !(rateHz > 0) {
		return l
	}
	perRow := o.RowSeconds * rateHz
	x := func(i, i0 int) float64 { return o.MarginMM + float64(i-i0)/rateHz*o.SpeedMMPerS }
	for r := range l.Rows {
		row := &l.Rows[r]
		i0 := int(math.Round(float64(r) * perRow))
		i1 := int(math.Round(float64(r+1) * perRow))
		if q != nil {
			for _, st := range q.Stretches {
				a, b := max(st.Start, i0), min(st.End, i1)
				if a < b {
					row.Shaded = append(row.Shaded, Shade{X0: x(a, i0), X1: x(b, i0), Kind: st.Kind})
				}
			}
		}
		for _, k := range premature {
			if k >= 0 && k < len(beats) && beats[k] >= i0 && beats[k] < i1 {
				row.Premature = append(row.Premature, x(beats[k], i0))
			}
		}
	}
	return l
}
