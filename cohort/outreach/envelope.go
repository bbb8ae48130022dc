package outreach

import "math"

// Rect is an area of a page or an envelope in millimetres, measured from its
// top-left corner.
type Rect struct {
	X, Y, W, H float64
}

// Right and Bottom are the far edges.
func (r Rect) Right() float64  { return r.X + r.W }
func (r Rect) Bottom() float64 { return r.Y + r.H }

// Paper is a sheet size, in millimetres.
type Paper struct {
	Name string // "a4" or "letter", as forms submit it
	W, H float64
}

// The papers letters are printed on: ISO 216 A4, 210 x 297 mm, and ANSI US
// Letter, 8.5 x 11 in (verified: the standard sizes).
var (
	PaperA4     = Paper{"a4", 210, 297}
	PaperLetter = Paper{"letter", 215.9, 279.4}
)

// PaperNamed returns the paper a form names; A4 for anything else.
func PaperNamed(name string) Paper {
	if name == PaperLetter.Name {
		return PaperLetter
	}
	return PaperA4
}

// Envelope is a window envelope and how a sheet goes into it: folded so that
// the top Panel millimetres of the sheet face the window, the sheet's top
// edge at the top. The folded sheet can shift inside by the difference in
// size, so the address must sit where the window shows it in every position.
type Envelope struct {
	Name   string
	Paper  Paper
	W, H   float64 // the envelope, lying with its long side horizontal
	Panel  float64 // height of the folded sheet's front panel
	Window Rect    // the window, from the envelope's top-left corner
}

// mm is inches to millimetres (1 in = 25.4 mm exactly).
func mm(in float64) float64 { return in * 25.4 }

// Envelopes are the window envelopes letters are laid out for:
//   - DL, 110 x 220 mm (ISO 269, verified), an A4 sheet folded in three
//     (panel 99 mm); window 90 x 45 mm, 20 mm from the left edge and 15 mm
//     from the bottom edge (DIN 680 window position; common practice, from
//     memory).
//   - C5, 162 x 229 mm (ISO 269, verified), an A4 sheet folded in half
//     (panel 148.5 mm); window 90 x 45 mm, 20 mm from the left and 45 mm
//     from the top (common practice, from memory).
//   - US No. 10, 4 1/8 x 9 1/2 in (verified: the common commercial size), a
//     US Letter sheet folded in three (panel 11/3 in); window 4 1/2 x 1 1/8 in,
//     7/8 in from the left and 1/2 in from the bottom (the usual standard
//     window; common practice, from memory).
var Envelopes = []Envelope{
	{Name: "DL", Paper: PaperA4, W: 220, H: 110, Panel: 297.0 / 3, Window: Rect{X: 20, Y: 110 - 15 - 45, W: 90, H: 45}},
	{Name: "C5", Paper: PaperA4, W: 229, H: 162, Panel: 297.0 / 2, Window: Rect{X: 20, Y: 45, W: 90, H: 45}},
	{Name: "US No. 10", Paper: PaperLetter, W: mm(9.5), H: mm(4.125), Panel: mm(11) / 3,
		Window: Rect{X: mm(0.875), Y: mm(4.125) - mm(0.5) - mm(1.125), W: mm(4.5), H: mm(1.125)}},
}

// Seen is the part of the sheet the window shows whatever the sheet's
// position in the envelope: the window in sheet coordinates for the sheet
// pushed to the top-left corner, intersected with the same for the sheet
// pushed to the bottom-right (any position between shows at least this).
func (e Envelope) Seen() Rect {
	dx := math.Max(e.W-e.Paper.W, 0)
	dy := math.Max(e.H-e.Panel, 0)
	// Sheet at the top-left: window in sheet coordinates is the window as it is.
	// Sheet at the bottom-right: shifted by (dx, dy), the window moves up-left.
	x0, y0 := e.Window.X, e.Window.Y
	x1, y1 := e.Window.Right()-dx, e.Window.Bottom()-dy
	// The panel ends at the fold: nothing below it shows.
	y1 = math.Min(y1, e.Panel)
	return Rect{X: x0, Y: y0, W: math.Max(x1-x0, 0), H: math.Max(y1-y0, 0)}
}

// addressInset keeps the address this far inside the area every window
// shows, for printers that place the page a little off.
const addressInset = 2.0

// AddressArea is where the address block goes on a sheet of paper p: inside
// what every window envelope for that paper shows in every position of the
// sheet, less a printing margin.
func AddressArea(p Paper) Rect {
	var r Rect
	first := true
	for _, e := range Envelopes {
		if e.Paper != p {
			continue
		}
		s := e.Seen()
		if first {
			r, first = s, false
			continue
		}
		x0, y0 := math.Max(r.X, s.X), math.Max(r.Y, s.Y)
		x1, y1 := math.Min(r.Right(), s.Right()), math.Min(r.Bottom(), s.Bottom())
		r = Rect{X: x0, Y: y0, W: math.Max(x1-x0, 0), H: math.Max(y1-y0, 0)}
	}
	return Rect{X: r.X + addressInset, Y: r.Y + addressInset, W: math.Max(r.W-2*addressInset, 0), H: math.Max(r.H-2*addressInset, 0)}
}

// WindowReach is every part of a sheet of paper p that some window envelope
// for it can show with the sheet anywhere in it: nothing but the address may
// be printed there.
func WindowReach(p Paper) Rect {
	var r Rect
	first := true
	for _, e := range Envelopes {
		if e.Paper != p {
			continue
		}
		dx, dy := math.Max(e.W-p.W, 0), math.Max(e.H-e.Panel, 0)
		s := Rect{X: e.Window.X - dx, Y: e.Window.Y - dy, W: e.Window.W + dx, H: e.Window.H + dy}
		if s.Bottom() > e.Panel {
			s.H = e.Panel - s.Y
		}
		if first {
			r, first = s, false
			continue
		}
		x0, y0 := math.Min(r.X, s.X), math.Min(r.Y, s.Y)
		x1, y1 := math.Max(r.Right(), s.Right()), math.Max(r.Bottom(), s.Bottom())
		r = Rect{X: x0, Y: y0, W: x1 - x0, H: y1 - y0}
	}
	return r
}
