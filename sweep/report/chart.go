package report

import (
	"math"
	"strconv"

	"codeberg.org/go-pdf/fpdf"
)

// Chart is a plot area with a logarithmic frequency axis and a linear dB
// axis, drawn on a Doc page. Coordinates given to its methods are data
// (Hz, dB); everything drawn inside the area is clipped to it.
type Chart struct {
	d *Doc
	// X, Y, W and H are the data area on the page, mm.
	X, Y, W, H float64
	// LoHz..HiHz and LoDB..HiDB are the axes' ranges.
	LoHz, HiHz, LoDB, HiDB float64
}

// Stroke is a line style: width mm, grey 0..255, dash pattern mm (nil:
// solid).
type Stroke struct {
	Width float64
	Grey  int
	Dash  []float64
}

// NewChart makes a chart whose data area is (x, y, w, h) mm. The
// frequency range is widened to at least a fifth of a decade and the dB
// range to at least 1 dB, so that a flat or one-frequency response still
// has axes.
func NewChart(d *Doc, x, y, w, h, loHz, hiHz, loDB, hiDB float64) *Chart {
	if !(loHz > 0) || math.IsInf(loHz, 0) {
		loHz = 1
	}
	if !(hiHz > loHz) || math.IsInf(hiHz, 0) {
		hiHz = loHz * 10
	}
	if r := math.Log10(hiHz / loHz); r < 0.2 {
		c := math.Sqrt(loHz * hiHz)
		loHz, hiHz = c/math.Pow(10, 0.1), c*math.Pow(10, 0.1)
	}
	if !(hiDB-loDB >= 1) || math.IsNaN(loDB) || math.IsInf(loDB, 0) || math.IsInf(hiDB, 0) {
		c := (loDB + hiDB) / 2
		if math.IsNaN(c) || math.IsInf(c, 0) {
			c = 0
		}
		loDB, hiDB = c-0.5, c+0.5
	}
	return &Chart{d: d, X: x, Y: y, W: w, H: h, LoHz: loHz, HiHz: hiHz, LoDB: loDB, HiDB: hiDB}
}

// PX maps a frequency to page x, mm.
func (c *Chart) PX(hz float64) float64 {
	return c.X + c.W*math.Log10(hz/c.LoHz)/math.Log10(c.HiHz/c.LoHz)
}

// PY maps a level to page y, mm.
func (c *Chart) PY(db float64) float64 {
	return c.Y + c.H*(c.HiDB-db)/(c.HiDB-c.LoDB)
}

func (c *Chart) set(s Stroke) {
	p := c.d.pdf
	p.SetDrawColor(s.Grey, s.Grey, s.Grey)
	p.SetLineWidth(s.Width)
	p.SetDashPattern(s.Dash, 0)
}

// Frame draws the grid, the frame, decade labels under the frequency axis
// and dB labels left of the level axis, and the axis titles.
func (c *Chart) Frame(yTitle string) {
	d, p := c.d, c.d.pdf
	d.Font(false, smallPt, inkMuted)
	lh := d.LineH()
	// Frequency grid: a line and a label at each decade, a light line at
	// 2…9 times the decade; 2× and 5× labelled when less than two decades
	// are shown.
	few := math.Log10(c.HiHz/c.LoHz) < 2
	for e := math.Floor(math.Log10(c.LoHz)); e <= math.Ceil(math.Log10(c.HiHz)); e++ {
		dec := math.Pow(10, e)
		for m := 1.0; m <= 9; m++ {
			hz := m * dec
			if hz < c.LoHz*(1-1e-9) || hz > c.HiHz*(1+1e-9) {
				continue
			}
			x := c.PX(hz)
			major := m == 1
			if major {
				c.set(Stroke{Width: 0.2, Grey: inkRule - 10})
			} else {
				c.set(Stroke{Width: 0.1, Grey: inkGrid})
			}
			p.Line(x, c.Y, x, c.Y+c.H)
			if major || few && (m == 2 || m == 5) {
				s := HzLabel(hz)
				lx := math.Max(d.Left, math.Min(d.Right-d.Width(s), x-d.Width(s)/2))
				d.Text(lx, c.Y+c.H+lh, s)
			}
		}
	}
	// Level grid.
	step := dbStep(c.HiDB - c.LoDB)
	dec := 0
	if step < 1 {
		dec = int(math.Ceil(-math.Log10(step) - 1e-9))
	}
	for v := math.Ceil(c.LoDB/step) * step; v <= c.HiDB+step*1e-9; v += step {
		y := c.PY(v)
		c.set(Stroke{Width: 0.1, Grey: inkGrid})
		p.Line(c.X, y, c.X+c.W, y)
		s := DB(v, dec)
		d.TextRight(c.X-1, y+lh*0.3, s)
	}
	c.set(Stroke{Width: 0.3, Grey: inkText})
	p.Rect(c.X, c.Y, c.W, c.H, "D")
	d.Font(false, smallPt, inkMuted)
	d.Text(c.X+c.W-d.Width("frequency"), c.Y+c.H+2*lh, "frequency")
	if yTitle != "" {
		p.TransformBegin()
		x, y := c.X-10.5, c.Y+c.H/2+d.Width(yTitle)/2
		p.TransformRotate(90, x, y)
		d.Text(x, y, yTitle)
		p.TransformEnd()
	}
}

// dbStep returns a step of 1, 2 or 5 × 10ⁿ dB giving 4 to 10 ticks over span.
func dbStep(span float64) float64 {
	raw := span / 6
	e := math.Pow(10, math.Floor(math.Log10(raw)))
	for _, m := range []float64{1, 2, 5, 10} {
		if m*e >= raw {
			return m * e
		}
	}
	return 10 * e
}

// DB formats a level with dec decimals, never "-0", with a true minus
// sign.
func DB(v float64, dec int) string {
	s := strconv.FormatFloat(v, 'f', dec, 64)
	if f, _ := strconv.ParseFloat(s, 64); f == 0 {
		s = strconv.FormatFloat(0, 'f', dec, 64)
	}
	if len(s) > 0 && s[0] == '-' {
		s = "−" + s[1:]
	}
	return s
}

// HzLabel labels a tick frequency compactly: "20 Hz", "1 kHz", "2.5 MHz".
func HzLabel(hz float64) string {
	unit, v := "Hz", hz
	switch {
	case hz >= 1e9*(1-1e-9):
		unit, v = "GHz", hz/1e9
	case hz >= 1e6*(1-1e-9):
		unit, v = "MHz", hz/1e6
	case hz >= 1e3*(1-1e-9):
		unit, v = "kHz", hz/1e3
	}
	return strconv.FormatFloat(math.Round(v*1000)/1000, 'g', -1, 64) + " " + unit
}

// clip runs draw with drawing clipped to the data area.
func (c *Chart) clip(draw func()) {
	c.d.pdf.ClipRect(c.X, c.Y, c.W, c.H, false)
	draw()
	c.d.pdf.ClipEnd()
}

// inX reports whether hz can be placed (positive, finite).
func inX(hz float64) bool { return hz > 0 && !math.IsInf(hz, 0) }

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

// limitY keeps y within a few area heights of the area, so that a wild
// value does not make the PDF's numbers huge; the clip hides the rest.
func (c *Chart) limitY(y float64) float64 {
	return math.Max(c.Y-3*c.H, math.Min(c.Y+4*c.H, y))
}

// Line draws the polyline through (hz[i], db[i]), broken where a value is
// not finite.
func (c *Chart) Line(hz, db []float64, s Stroke) {
	c.clip(func() {
		c.set(s)
		p := c.d.pdf
		open := false
		n := 0
		for i := range hz {
			if !inX(hz[i]) || !finite(db[i]) {
				if open && n > 1 {
					p.DrawPath("D")
				}
				open, n = false, 0
				continue
			}
			x, y := c.PX(hz[i]), c.limitY(c.PY(db[i]))
			if !open {
				p.MoveTo(x, y)
				open = true
			} else {
				p.LineTo(x, y)
			}
			n++
		}
		if open && n > 1 {
			p.DrawPath("D")
		}
	})
}

// Band fills the region between lo and hi over hz in grey.
func (c *Chart) Band(hz, lo, hi []float64, grey int) {
	var pts []fpdf.PointType
	for i := range hz {
		if inX(hz[i]) && finite(lo[i]) && finite(hi[i]) {
			pts = append(pts, fpdf.PointType{X: c.PX(hz[i]), Y: c.limitY(c.PY(hi[i]))})
		}
	}
	for i := len(hz) - 1; i >= 0; i-- {
		if inX(hz[i]) && finite(lo[i]) && finite(hi[i]) {
			pts = append(pts, fpdf.PointType{X: c.PX(hz[i]), Y: c.limitY(c.PY(lo[i]))})
		}
	}
	if len(pts) < 4 {
		return
	}
	c.clip(func() {
		c.d.pdf.SetFillColor(grey, grey, grey)
		c.d.pdf.Polygon(pts, "F")
	})
}

// HLine draws a horizontal line at db across the area with label at its
// right end, above the line.
func (c *Chart) HLine(db float64, s Stroke, label string) {
	if !finite(db) || db < c.LoDB || db > c.HiDB {
		return
	}
	y := c.PY(db)
	c.set(s)
	c.d.pdf.Line(c.X, y, c.X+c.W, y)
	if label != "" {
		c.d.Font(false, smallPt, inkMuted)
		c.d.TextRight(c.X+c.W-1, y-0.8, label)
	}
}

// Marker shapes.
const (
	Dot     = iota // filled circle
	Ring           // open circle
	Square         // open square
	Diamond        // filled diamond
	Cross          // ×
)

// Mark draws a marker of shape and size (mm) at (hz, db), in grey; it is
// clipped to the area.
func (c *Chart) Mark(hz, db float64, shape int, size float64, grey int) {
	if !inX(hz) || !finite(db) {
		return
	}
	x, y := c.PX(hz), c.PY(db)
	if x < c.X-size || x > c.X+c.W+size || y < c.Y-size || y > c.Y+c.H+size {
		return
	}
	c.clip(func() { c.mark(x, y, shape, size, grey) })
}

// Marks draws many markers of one style, clipped once.
func (c *Chart) Marks(hz, db []float64, shape int, size float64, grey int) {
	c.clip(func() {
		for i := range hz {
			if inX(hz[i]) && finite(db[i]) {
				c.mark(c.PX(hz[i]), c.limitY(c.PY(db[i])), shape, size, grey)
			}
		}
	})
}

func (c *Chart) mark(x, y float64, shape int, size float64, grey int) {
	p := c.d.pdf
	r := size / 2
	p.SetDrawColor(grey, grey, grey)
	p.SetFillColor(grey, grey, grey)
	p.SetLineWidth(0.18)
	p.SetDashPattern(nil, 0)
	switch shape {
	case Dot:
		p.Circle(x, y, r, "F")
	case Ring:
		p.Circle(x, y, r, "D")
	case Square:
		p.Rect(x-r, y-r, size, size, "D")
	case Diamond:
		p.Polygon([]fpdf.PointType{{X: x, Y: y - r*1.3}, {X: x + r, Y: y}, {X: x, Y: y + r*1.3}, {X: x - r, Y: y}}, "FD")
	case Cross:
		p.Line(x-r, y-r, x+r, y+r)
		p.Line(x-r, y+r, x+r, y-r)
	}
}

// VLine draws a vertical line at hz from level db down to the bottom of
// the area.
func (c *Chart) VLine(hz, db float64, s Stroke) {
	if !inX(hz) || hz < c.LoHz || hz > c.HiHz {
		return
	}
	x := c.PX(hz)
	y := c.Y
	if finite(db) {
		y = math.Max(c.Y, math.Min(c.Y+c.H, c.PY(db)))
	}
	c.set(s)
	c.d.pdf.Line(x, y, x, c.Y+c.H)
}

// Label writes s near page point (x, y) inside the area: to the right of
// x unless it would leave the area, then to the left; clamped vertically.
// A white box behind the text keeps it readable over the grid.
func (c *Chart) Label(x, y float64, s string, grey int) {
	d := c.d
	d.Font(false, smallPt, grey)
	w, lh := d.Width(s), d.LineH()
	tx := x + 1.2
	if tx+w > c.X+c.W-0.5 {
		tx = x - 1.2 - w
	}
	tx = math.Max(c.X+0.5, tx)
	ty := math.Max(c.Y+lh, math.Min(c.Y+c.H-0.8, y))
	d.pdf.SetFillColor(255, 255, 255)
	d.pdf.Rect(tx-0.4, ty-lh*0.8, w+0.8, lh, "F")
	d.Text(tx, ty-lh*0.12, s)
}

// LegendItem is one entry of a legend drawn under the chart.
type LegendItem struct {
	Text string
	// Draw draws the entry's sample in the 6 mm × 3 mm box at (x, y).
	Draw func(x, y float64)
}

// Legend writes items in a row (wrapping) starting at page y, and
// returns the y below it.
func (c *Chart) Legend(y float64, items []LegendItem) float64 {
	d := c.d
	d.Font(false, smallPt, inkMuted)
	lh := d.LineH() + 0.6
	x := c.X
	for _, it := range items {
		w := 7 + d.Width(it.Text) + 4
		if x+w > c.X+c.W && x > c.X {
			x, y = c.X, y+lh
		}
		if it.Draw != nil {
			it.Draw(x, y-lh*0.55)
		}
		d.Font(false, smallPt, inkMuted)
		d.Text(x+7, y, it.Text)
		x += w
	}
	return y + lh*0.4
}

// SampleLine draws a legend sample of a line style.
func (c *Chart) SampleLine(s Stroke) func(x, y float64) {
	return func(x, y float64) {
		c.set(s)
		c.d.pdf.Line(x, y+1.5, x+6, y+1.5)
	}
}

// SampleMark draws a legend sample of a marker.
func (c *Chart) SampleMark(shape int, size float64, grey int) func(x, y float64) {
	return func(x, y float64) { c.mark(x+3, y+1.5, shape, size, grey) }
}

// SampleBand draws a legend sample of a band.
func (c *Chart) SampleBand(grey int) func(x, y float64) {
	return func(x, y float64) {
		c.d.pdf.SetFillColor(grey, grey, grey)
		c.d.pdf.Rect(x, y+0.3, 6, 2.4, "F")
	}
}
