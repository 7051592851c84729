package export

import (
	"errors"
	"fmt"
	"image/color"
	"image/png"
	"io"
	"math"
	"strings"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"
	"gonum.org/v1/plot/vg/vgpdf"
	"gonum.org/v1/plot/vg/vgsvg"

	"rolloff/sweep/analysis"
	"rolloff/sweep/point"
)

// ErrFormat is returned for an unknown plot format.
var ErrFormat = errors.New("export: unknown plot format")

// PlotOptions sets a plot's title and size. Zero fields take the defaults:
// 18 cm × 11 cm, PNG at 120 dots per inch.
type PlotOptions struct {
	Title         string
	Width, Height vg.Length
	DPI           int
}

func (po PlotOptions) withDefaults() PlotOptions {
	if po.Width <= 0 {
		po.Width = 18 * vg.Centimeter
	}
	if po.Height <= 0 {
		po.Height = 11 * vg.Centimeter
	}
	if po.DPI <= 0 {
		po.DPI = 120
	}
	return po
}

// columns is the plot's width in pixels at its DPI: decimation keeps no
// more than two points (the min and the max) per pixel column.
func (po PlotOptions) columns() int {
	return max(64, int(float64(po.Width/vg.Inch)*float64(po.DPI)))
}

// Series is one run in an overlay or difference plot.
type Series struct {
	Name   string
	Points []point.Point
	// Result is the run's analysis; when nil the run is analysed with the
	// passband maximum as reference.
	Result *analysis.Result
}

func (s Series) result() (*analysis.Result, error) {
	if s.Result != nil {
		return s.Result, nil
	}
	r, err := analysis.Analyze(s.Points, analysis.Options{RefMode: analysis.RefMax})
	if err != nil {
		return nil, fmt.Errorf("%s: %w", s.Name, err)
	}
	return r, nil
}

// The look: black ink on white, greys for secondary lines, and line
// dashes and marker shapes that tell series apart without colour.
var (
	ink      = color.Gray{Y: 0}
	darkGrey = color.Gray{Y: 90}
	gridGrey = color.Gray{Y: 215}
	bandFill = color.Gray{Y: 222}

	seriesColors = []color.Color{
		color.RGBA{0, 0, 0, 255},
		color.RGBA{31, 78, 160, 255},
		color.RGBA{178, 34, 34, 255},
		color.RGBA{34, 120, 60, 255},
		color.RGBA{120, 60, 150, 255},
		color.RGBA{160, 100, 0, 255},
	}
	seriesDashes = [][]vg.Length{
		nil,
		{vg.Points(6), vg.Points(3)},
		{vg.Points(1.5), vg.Points(2)},
		{vg.Points(8), vg.Points(3), vg.Points(1.5), vg.Points(3)},
		{vg.Points(3), vg.Points(3)},
		{vg.Points(10), vg.Points(4)},
	}
	seriesGlyphs = []draw.GlyphDrawer{
		draw.CircleGlyph{}, draw.SquareGlyph{}, draw.TriangleGlyph{}, draw.RingGlyph{}, draw.BoxGlyph{}, draw.PyramidGlyph{},
	}
)

// hzTicks marks a log frequency axis: a labelled major tick at each decade
// ("10 Hz", "1 kHz", "1 MHz"), minor ticks at 2…9 times the decade. When the
// axis spans less than a decade the 2× and 5× ticks are labelled too.
type hzTicks struct{}

func (hzTicks) Ticks(lo, hi float64) []plot.Tick {
	if !(lo > 0) || !(hi > lo) {
		return nil
	}
	var ts []plot.Tick
	d0 := math.Floor(math.Log10(lo))
	d1 := math.Ceil(math.Log10(hi))
	short := d1-d0 <= 1.5 || math.Log10(hi/lo) < 1.2
	for d := d0; d <= d1; d++ {
		dec := math.Pow(10, d)
		for m := 1; m <= 9; m++ {
			v := float64(m) * dec
			if v < lo*(1-1e-9) || v > hi*(1+1e-9) {
				continue
			}
			t := plot.Tick{Value: v}
			if m == 1 || (short && (m == 2 || m == 5)) {
				t.Label = tickHz(v)
			}
			ts = append(ts, t)
		}
	}
	return ts
}

// tickHz labels a frequency compactly: "20 Hz", "1 kHz", "2.5 MHz".
func tickHz(hz float64) string {
	unit, v := "Hz", hz
	switch {
	case hz >= 1e6*(1-1e-9):
		unit, v = "MHz", hz/1e6
	case hz >= 1e3*(1-1e-9):
		unit, v = "kHz", hz/1e3
	}
	s := fmt.Sprintf("%.3g", v)
	return s + " " + unit
}

// dbTicks marks a dB axis with round steps (1, 2 or 5 × 10ⁿ dB) giving
// five to ten labelled ticks, labels with no more decimals than the step.
type dbTicks struct{}

func (dbTicks) Ticks(lo, hi float64) []plot.Tick {
	if !(hi > lo) || math.IsInf(lo, 0) || math.IsInf(hi, 0) {
		return nil
	}
	raw := (hi - lo) / 7
	mag := math.Pow(10, math.Floor(math.Log10(raw)))
	step := mag
	for _, m := range []float64{1, 2, 5, 10} {
		if m*mag >= raw {
			step = m * mag
			break
		}
	}
	dec := max(0, -int(math.Floor(math.Log10(step)+1e-9)))
	var ts []plot.Tick
	for v := math.Ceil(lo/step) * step; v <= hi+step*1e-9; v += step {
		ts = append(ts, plot.Tick{Value: v, Label: fmtDB(v, dec)})
		if len(ts) > 100 {
			break
		}
	}
	return ts
}

// fmtDB formats a level with dec decimals, never as "-0".
func fmtDB(v float64, dec int) string {
	s := fmt.Sprintf("%.*f", dec, v)
	if strings.Trim(s, "-0.") == "" {
		s = strings.TrimPrefix(s, "-")
	}
	return s
}

// chart is a plot and the names of its legend entries (for placing the
// legend).
type chart struct {
	*plot.Plot
	names []string
}

func (c *chart) addLegend(name string, thumbs ...plot.Thumbnailer) {
	c.Legend.Add(name, thumbs...)
	c.names = append(c.names, name)
}

func newPlot(po PlotOptions, yLabel string) *chart {
	p := &chart{Plot: plot.New()}
	p.BackgroundColor = color.White
	if po.Title != "" {
		p.Title.Text = po.Title
		p.Title.TextStyle.Font.Size = vg.Points(12)
	}
	p.X.Label.Text = "frequency"
	p.Y.Label.Text = yLabel
	p.X.Scale = plot.LogScale{}
	p.X.Tick.Marker = hzTicks{}
	p.Y.Tick.Marker = dbTicks{}
	for _, ax := range []*plot.Axis{&p.X, &p.Y} {
		ax.Label.TextStyle.Font.Size = vg.Points(10)
		ax.Tick.Label.Font.Size = vg.Points(9)
		ax.LineStyle.Color = darkGrey
		ax.Tick.LineStyle.Color = darkGrey
	}
	g := plotter.NewGrid()
	g.Vertical = draw.LineStyle{Color: gridGrey, Width: vg.Points(0.5)}
	g.Horizontal = draw.LineStyle{Color: gridGrey, Width: vg.Points(0.5)}
	p.Add(g)
	p.Legend.TextStyle.Font.Size = vg.Points(8.5)
	p.Legend.Padding = vg.Points(1.5)
	p.Legend.ThumbnailWidth = vg.Points(22)
	return p
}

// finiteXYs keeps the points with positive finite x and finite y.
func finiteXYs(xs, ys []float64) plotter.XYs {
	out := make(plotter.XYs, 0, len(xs))
	for i := range xs {
		if xs[i] > 0 && !math.IsInf(xs[i], 0) && !math.IsNaN(ys[i]) && !math.IsInf(ys[i], 0) {
			out = append(out, plotter.XY{X: xs[i], Y: ys[i]})
		}
	}
	return out
}

// decimate keeps, for each of columns pixel columns (equal in log x), the
// first, minimum, maximum and last point in x order; shorter inputs are
// returned as they are. xs must be sorted and positive.
func decimate(pts plotter.XYs, columns int) plotter.XYs {
	if len(pts) <= 2*columns || len(pts) < 3 {
		return pts
	}
	x0, x1 := math.Log10(pts[0].X), math.Log10(pts[len(pts)-1].X)
	if !(x1 > x0) {
		return pts
	}
	out := make(plotter.XYs, 0, 4*columns)
	col := func(x float64) int { return min(columns-1, int((math.Log10(x)-x0)/(x1-x0)*float64(columns))) }
	for i := 0; i < len(pts); {
		c := col(pts[i].X)
		j := i
		lo, hi := i, i
		for j < len(pts) && col(pts[j].X) == c {
			if pts[j].Y < pts[lo].Y {
				lo = j
			}
			if pts[j].Y > pts[hi].Y {
				hi = j
			}
			j++
		}
		keep := []int{i, lo, hi, j - 1}
		// in x order, without repeats
		for a := 0; a < len(keep); a++ {
			for b := a + 1; b < len(keep); b++ {
				if keep[b] < keep[a] {
					keep[a], keep[b] = keep[b], keep[a]
				}
			}
		}
		last := -1
		for _, k := range keep {
			if k != last {
				out = append(out, pts[k])
				last = k
			}
		}
		i = j
	}
	return out
}

// curveXYs samples the analysed curve: the model on a log grid of about
// one point per pixel column, the interpolant through the (decimated)
// included points.
func curveXYs(res *analysis.Result, included plotter.XYs, columns int) plotter.XYs {
	if res.CornerSource != "model" {
		return decimate(included, columns)
	}
	lo, hi := res.SweepHz[0], res.SweepHz[1]
	n := columns
	out := make(plotter.XYs, 0, n+1)
	for i := 0; i <= n; i++ {
		f := lo * math.Pow(hi/lo, float64(i)/float64(n))
		if g, ok := res.GainAt(f); ok && !math.IsNaN(g) && !math.IsInf(g, 0) {
			out = append(out, plotter.XY{X: f, Y: g})
		}
	}
	return out
}

func lineOf(xys plotter.XYs, c color.Color, width vg.Length, dashes []vg.Length) (*plotter.Line, error) {
	l, err := plotter.NewLine(xys)
	if err != nil {
		return nil, err
	}
	l.LineStyle = draw.LineStyle{Color: c, Width: width, Dashes: dashes}
	return l, nil
}

func hline(y, x0, x1 float64, c color.Color, width vg.Length, dashes []vg.Length) (*plotter.Line, error) {
	return lineOf(plotter.XYs{{X: x0, Y: y}, {X: x1, Y: y}}, c, width, dashes)
}

// responsePlot builds the gain plot of one analysed response.
func responsePlot(res *analysis.Result, po PlotOptions) (*chart, error) {
	po = po.withDefaults()
	p := newPlot(po, "gain (dB)")
	cols := po.columns()
	var inc, exc, bandHi, bandLo plotter.XYs
	for _, s := range res.Samples {
		if !(s.FreqHz > 0) || math.IsInf(s.FreqHz, 0) || math.IsNaN(s.GainDB) || math.IsInf(s.GainDB, 0) {
			continue
		}
		xy := plotter.XY{X: s.FreqHz, Y: s.GainDB}
		if s.Excluded {
			exc = append(exc, xy)
			continue
		}
		inc = append(inc, xy)
		u := analysis.CoverageFactor * s.UDB
		bandHi = append(bandHi, plotter.XY{X: s.FreqHz, Y: s.GainDB + u})
		bandLo = append(bandLo, plotter.XY{X: s.FreqHz, Y: s.GainDB - u})
	}
	if len(inc) < 2 {
		return nil, fmt.Errorf("export: %d plottable points: want at least 2", len(inc))
	}
	x0, x1 := res.SweepHz[0], res.SweepHz[1]

	// Uncertainty band (k = 2), drawn first.
	if hasWidth(bandHi, bandLo) {
		hi, lo := decimateEnvelope(bandHi, cols, true), decimateEnvelope(bandLo, cols, false)
		ring := append(plotter.XYs{}, hi...)
		for i := len(lo) - 1; i >= 0; i-- {
			ring = append(ring, lo[i])
		}
		poly, err := plotter.NewPolygon(ring)
		if err == nil {
			poly.Color = bandFill
			poly.LineStyle.Width = 0
			p.Add(poly)
			p.addLegend(fmt.Sprintf("uncertainty, k = %g", analysis.CoverageFactor), poly)
		}
	}

	// Reference and corner levels.
	ref, err := hline(res.ReferenceGainDB, x0, x1, darkGrey, vg.Points(0.8), []vg.Length{vg.Points(7), vg.Points(3)})
	if err != nil {
		return nil, err
	}
	lvl, err := hline(res.ThresholdDB, x0, x1, darkGrey, vg.Points(0.8), []vg.Length{vg.Points(1.5), vg.Points(2)})
	if err != nil {
		return nil, err
	}
	p.Add(ref, lvl)
	p.addLegend("reference "+fmtDB(res.ReferenceGainDB, 2)+" dB", ref)
	p.addLegend(fmtDB(res.LevelDB, 2)+" dB level", lvl)

	// Mask lines.
	if m := maskOf(res); m != nil {
		shift := 0.0
		if m.Relative {
			shift = res.ReferenceGainDB
		}
		for i, line := range [][][2]float64{m.Upper, m.Lower} {
			if len(line) < 2 {
				continue
			}
			xys := make(plotter.XYs, len(line))
			for k, v := range line {
				xys[k] = plotter.XY{X: v[0], Y: v[1] + shift}
			}
			l, err := lineOf(xys, color.RGBA{150, 30, 30, 255}, vg.Points(1.4), []vg.Length{vg.Points(9), vg.Points(2.5), vg.Points(2), vg.Points(2.5)})
			if err != nil {
				return nil, err
			}
			p.Add(l)
			if i == 0 || len(m.Upper) < 2 {
				p.addLegend("limit mask", l)
			}
		}
	}

	// The response.
	curve := curveXYs(res, inc, cols)
	if len(curve) >= 2 {
		l, err := lineOf(curve, ink, vg.Points(1.3), nil)
		if err != nil {
			return nil, err
		}
		p.Add(l)
		name := "response"
		if res.CornerSource == "model" {
			name = "fitted model"
		} else {
			name = "response (interpolated)"
		}
		if len(inc) <= 300 {
			sc, err := plotter.NewScatter(inc)
			if err != nil {
				return nil, err
			}
			sc.GlyphStyle = draw.GlyphStyle{Color: ink, Radius: vg.Points(1.8), Shape: draw.RingGlyph{}}
			p.Add(sc)
			p.addLegend(name, l)
			p.addLegend("measured", sc)
		} else {
			p.addLegend(name, l)
		}
	}
	if len(exc) > 0 {
		sc, err := plotter.NewScatter(exc)
		if err != nil {
			return nil, err
		}
		sc.GlyphStyle = draw.GlyphStyle{Color: darkGrey, Radius: vg.Points(3), Shape: draw.CrossGlyph{}}
		p.Add(sc)
		p.addLegend("excluded (flagged)", sc)
	}

	// Corner markers, labelled with their values on the passband side,
	// below the level line, where the curve leaves room.
	var cxy plotter.XYs
	for _, c := range []struct {
		hz, u *float64
		low   bool
	}{{res.LowHz, res.LowUHz, true}, {res.HighHz, res.HighUHz, false}} {
		if c.hz == nil {
			continue
		}
		xy := plotter.XY{X: *c.hz, Y: res.ThresholdDB}
		cxy = append(cxy, xy)
		lab := analysis.FormatHz(*c.hz, 4)
		if c.u != nil {
			lab = analysis.FormatWithU(*c.hz, *c.u)
		}
		lb, err := plotter.NewLabels(plotter.XYLabels{XYs: plotter.XYs{xy}, Labels: []string{lab}})
		if err != nil {
			return nil, err
		}
		lb.TextStyle[0].Font.Size = vg.Points(8.5)
		lb.TextStyle[0].Color = ink
		lb.TextStyle[0].YAlign = draw.YTop
		if c.low {
			lb.TextStyle[0].XAlign = draw.XLeft
			lb.Offset = vg.Point{X: vg.Points(6), Y: -vg.Points(5)}
		} else {
			lb.TextStyle[0].XAlign = draw.XRight
			lb.Offset = vg.Point{X: -vg.Points(6), Y: -vg.Points(5)}
		}
		p.Add(lb)
	}
	if len(cxy) > 0 {
		sc, err := plotter.NewScatter(cxy)
		if err != nil {
			return nil, err
		}
		sc.GlyphStyle = draw.GlyphStyle{Color: ink, Radius: vg.Points(3.2), Shape: draw.PyramidGlyph{}}
		p.Add(sc)
		p.addLegend("corner", sc)
	}

	setYRange(p, inc, exc, res)
	p.X.Min, p.X.Max = x0, x1
	placeLegend(p, po, append(append(append(plotter.XYs{}, curve...), exc...), cxy...))
	return p, nil
}

func maskOf(res *analysis.Result) *analysis.Mask {
	if res.Mask == nil {
		return nil
	}
	return res.MaskUsed()
}

func hasWidth(hi, lo plotter.XYs) bool {
	for i := range hi {
		if hi[i].Y-lo[i].Y > 0 {
			return true
		}
	}
	return false
}

// decimateEnvelope keeps, per pixel column, the largest (upper) or
// smallest value, so that the band never looks narrower than it is.
func decimateEnvelope(pts plotter.XYs, columns int, upper bool) plotter.XYs {
	if len(pts) <= 2*columns {
		return pts
	}
	x0, x1 := math.Log10(pts[0].X), math.Log10(pts[len(pts)-1].X)
	out := make(plotter.XYs, 0, columns+2)
	col := func(x float64) int { return min(columns-1, int((math.Log10(x)-x0)/(x1-x0)*float64(columns))) }
	for i := 0; i < len(pts); {
		c := col(pts[i].X)
		best := pts[i]
		var sx float64
		n := 0
		j := i
		for ; j < len(pts) && col(pts[j].X) == c; j++ {
			if (upper && pts[j].Y > best.Y) || (!upper && pts[j].Y < best.Y) {
				best.Y = pts[j].Y
			}
			sx += math.Log10(pts[j].X)
			n++
		}
		best.X = math.Pow(10, sx/float64(n))
		if i == 0 {
			best.X = pts[0].X
		}
		if j == len(pts) {
			best.X = pts[len(pts)-1].X
		}
		out = append(out, best)
		i = j
	}
	return out
}

// setYRange fits the y axis to the data with some headroom, keeping the
// level line and the labels under the corners in view.
func setYRange(p *chart, inc, exc plotter.XYs, res *analysis.Result) {
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, set := range []plotter.XYs{inc, exc} {
		for _, v := range set {
			lo, hi = math.Min(lo, v.Y), math.Max(hi, v.Y)
		}
	}
	lo = math.Min(lo, res.ThresholdDB-1)
	hi = math.Max(hi, res.ReferenceGainDB)
	if m := maskOf(res); m != nil {
		shift := 0.0
		if m.Relative {
			shift = res.ReferenceGainDB
		}
		for _, line := range [][][2]float64{m.Upper, m.Lower} {
			for _, v := range line {
				lo, hi = math.Min(lo, v[1]+shift), math.Max(hi, v[1]+shift)
			}
		}
	}
	span := math.Max(hi-lo, 1)
	p.Y.Min = lo - 0.06*span
	p.Y.Max = hi + 0.08*span
}

// placeLegend puts the legend where it covers the fewest points of the
// curve: left, centre or right, at the top or the bottom of the data area.
// The legend's size is estimated from its entries' text widths.
func placeLegend(p *chart, po PlotOptions, curve plotter.XYs) {
	po = po.withDefaults()
	entries := len(p.names)
	if entries == 0 {
		return
	}
	ts := p.Legend.TextStyle
	wText := vg.Length(0)
	for _, name := range p.names {
		wText = max(wText, ts.Width(name))
	}
	lineH := ts.Height("Ag") + p.Legend.Padding
	// Data area: the canvas less the axes (about 55 pt left, 35 pt below).
	areaW, areaH := po.Width-vg.Points(65), po.Height-vg.Points(45)
	if p.Title.Text != "" {
		areaH -= vg.Points(18)
	}
	fw := float64((wText + p.Legend.ThumbnailWidth + vg.Points(14)) / areaW)
	fh := float64((lineH*vg.Length(entries) + vg.Points(10)) / areaH)
	x0, x1 := math.Log10(p.X.Min), math.Log10(p.X.Max)
	y0, y1 := p.Y.Min, p.Y.Max
	type spot struct {
		left, top bool
		centre    bool
	}
	spots := []spot{{false, true, false}, {true, true, false}, {false, false, false}, {true, false, false}, {false, true, true}, {false, false, true}}
	best, bestN := 0, math.MaxInt
	for k, sp := range spots {
		var lo, hi float64
		switch {
		case sp.centre:
			lo, hi = 0.5-fw/2, 0.5+fw/2
		case sp.left:
			lo, hi = 0, fw+0.02
		default:
			lo, hi = 1-fw-0.02, 1
		}
		ylo, yhi := 1-fh-0.02, 1.0
		if !sp.top {
			ylo, yhi = 0, fh+0.02
		}
		n := 0
		for _, v := range curve {
			fx := (math.Log10(v.X) - x0) / (x1 - x0)
			fy := (v.Y - y0) / (y1 - y0)
			if fx >= lo-0.01 && fx <= hi+0.01 && fy >= ylo-0.02 && fy <= yhi+0.02 {
				n++
			}
		}
		if n < bestN {
			best, bestN = k, n
		}
	}
	sp := spots[best]
	p.Legend.Top = sp.top
	p.Legend.Left = sp.left || sp.centre
	switch {
	case sp.centre:
		p.Legend.XOffs = vg.Length((0.5 - fw/2) * float64(areaW))
	case sp.left:
		p.Legend.XOffs = vg.Points(8)
	default:
		p.Legend.XOffs = -vg.Points(8)
	}
	if sp.top {
		p.Legend.YOffs = -vg.Points(6)
	} else {
		p.Legend.YOffs = vg.Points(6)
	}
}

// fastPNG encodes an image canvas with the fastest deflate level: a plot
// of flat colours compresses well at any level.
type fastPNG struct{ c *vgimg.Canvas }

func (f fastPNG) WriteTo(w io.Writer) (int64, error) {
	cw := &countWriter{w: w}
	err := (&png.Encoder{CompressionLevel: png.BestSpeed}).Encode(cw, f.c.Image())
	return cw.n, err
}

type countWriter struct {
	w io.Writer
	n int64
}

func (c *countWriter) Write(b []byte) (int, error) {
	n, err := c.w.Write(b)
	c.n += int64(n)
	return n, err
}

// render writes p in format ("png", "svg" or "pdf"; a leading dot is
// accepted).
func render(w io.Writer, p *plot.Plot, format string, po PlotOptions) error {
	po = po.withDefaults()
	var c interface {
		vg.CanvasSizer
	}
	var wt io.WriterTo
	switch strings.ToLower(strings.TrimPrefix(format, ".")) {
	case "png":
		ic := vgimg.NewWith(vgimg.UseWH(po.Width, po.Height), vgimg.UseDPI(po.DPI))
		c, wt = ic, fastPNG{ic}
	case "svg":
		sc := vgsvg.New(po.Width, po.Height)
		c, wt = sc, sc
	case "pdf":
		pc := vgpdf.New(po.Width, po.Height)
		pc.EmbedFonts(true)
		c, wt = pc, pc
	default:
		return fmt.Errorf("%w %q: want png, svg or pdf", ErrFormat, format)
	}
	p.Draw(draw.New(c))
	_, err := wt.WriteTo(w)
	return err
}

// WritePlot writes the gain plot of a response in format "png", "svg" or
// "pdf": log frequency axis, the response (fitted model or interpolant) and
// the measured points, the uncertainty band (k = 2), the reference and
// corner levels, the corners labelled with their values, the mask lines and
// the flagged points. res may be nil: pts are then analysed with default
// options, falling back to the passband maximum as reference. The zero
// PlotOptions gives an untitled plot of the default size.
func WritePlot(w io.Writer, format string, pts []point.Point, res *analysis.Result, po PlotOptions) error {
	if res == nil {
		var err error
		res, err = analysis.Analyze(pts, analysis.Options{})
		if err != nil {
			res, err = analysis.Analyze(pts, analysis.Options{RefMode: analysis.RefMax})
			if err != nil {
				return err
			}
		}
	}
	p, err := responsePlot(res, po)
	if err != nil {
		return err
	}
	return render(w, p.Plot, format, po)
}

// Overlay writes the gain curves of several runs on one plot, each with
// its own line style and marker shape, named in the legend with its upper
// corner. The zero PlotOptions gives an untitled plot of the default size.
func Overlay(w io.Writer, format string, po PlotOptions, series ...Series) error {
	if len(series) == 0 {
		return errors.New("export: overlay of no runs")
	}
	po = po.withDefaults()
	p := newPlot(po, "gain (dB)")
	cols := po.columns()
	xlo, xhi := math.Inf(1), math.Inf(-1)
	ylo, yhi := math.Inf(1), math.Inf(-1)
	var all plotter.XYs
	for i, s := range series {
		res, err := s.result()
		if err != nil {
			return err
		}
		var inc plotter.XYs
		for _, sm := range res.Samples {
			if !sm.Excluded {
				inc = append(inc, plotter.XY{X: sm.FreqHz, Y: sm.GainDB})
			}
		}
		inc = finiteXYs(xsOf(inc), ysOf(inc))
		if len(inc) < 2 {
			return fmt.Errorf("export: %s: %d plottable points: want at least 2", s.Name, len(inc))
		}
		curve := curveXYs(res, inc, cols)
		c := seriesColors[i%len(seriesColors)]
		l, err := lineOf(curve, c, vg.Points(1.2), seriesDashes[i%len(seriesDashes)])
		if err != nil {
			return err
		}
		p.Add(l)
		thumbs := []plot.Thumbnailer{l}
		if len(inc) <= 300 {
			sc, err := plotter.NewScatter(inc)
			if err != nil {
				return err
			}
			sc.GlyphStyle = draw.GlyphStyle{Color: c, Radius: vg.Points(2), Shape: seriesGlyphs[i%len(seriesGlyphs)]}
			p.Add(sc)
			thumbs = append(thumbs, sc)
		}
		name := s.Name
		if res.LowHz != nil {
			name += ", low " + analysis.FormatHz(*res.LowHz, 4)
		}
		if res.HighHz != nil {
			name += ", high " + analysis.FormatHz(*res.HighHz, 4)
		}
		p.addLegend(name, thumbs...)
		for _, v := range inc {
			xlo, xhi = math.Min(xlo, v.X), math.Max(xhi, v.X)
			ylo, yhi = math.Min(ylo, v.Y), math.Max(yhi, v.Y)
		}
		all = append(all, curve...)
	}
	span := math.Max(yhi-ylo, 1)
	p.X.Min, p.X.Max = xlo, xhi
	p.Y.Min, p.Y.Max = ylo-0.06*span, yhi+0.08*span
	placeLegend(p, po, all)
	return render(w, p.Plot, format, po)
}

func xsOf(v plotter.XYs) []float64 {
	out := make([]float64, len(v))
	for i := range v {
		out[i] = v[i].X
	}
	return out
}

func ysOf(v plotter.XYs) []float64 {
	out := make([]float64, len(v))
	for i := range v {
		out[i] = v[i].Y
	}
	return out
}
