package export

import (
	"fmt"
	"io"
	"math"

	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	"rolloff/sweep/analysis"
)

// DiffPoints is the number of points of the common grid of a difference.
const DiffPoints = 400

// Difference is run B − run A on a common grid.
type Difference struct {
	FreqHz []float64 // common grid, log-spaced over the overlap of the runs
	DiffDB []float64 // B − A, dB
	// UDB is the expanded uncertainty (k = 2) of the difference, the two
	// runs' uncertainties combined root-sum-square as uncorrelated.
	UDB []float64
}

// Diff interpolates both runs' included points (monotone cubic in log
// frequency) on a common grid of DiffPoints log-spaced frequencies over the
// overlap of their sweeps and returns B − A.
func Diff(a, b Series) (*Difference, error) {
	ra, err := a.result()
	if err != nil {
		return nil, err
	}
	rb, err := b.result()
	if err != nil {
		return nil, err
	}
	ia, ua, err := interpOf(ra)
	if err != nil {
		return nil, fmt.Errorf("export: %s: %w", a.Name, err)
	}
	ib, ub, err := interpOf(rb)
	if err != nil {
		return nil, fmt.Errorf("export: %s: %w", b.Name, err)
	}
	lo := math.Max(ra.SweepHz[0], rb.SweepHz[0])
	hi := math.Min(ra.SweepHz[1], rb.SweepHz[1])
	if !(hi > lo) {
		return nil, fmt.Errorf("export: %s (%v..%v Hz) and %s (%v..%v Hz) do not overlap in frequency", a.Name, ra.SweepHz[0], ra.SweepHz[1], b.Name, rb.SweepHz[0], rb.SweepHz[1])
	}
	d := &Difference{}
	for i := 0; i < DiffPoints; i++ {
		f := lo * math.Pow(hi/lo, float64(i)/float64(DiffPoints-1))
		if i == DiffPoints-1 {
			f = hi
		}
		ga, gb := ia.At(f), ib.At(f)
		if math.IsNaN(ga) || math.IsNaN(gb) {
			continue
		}
		d.FreqHz = append(d.FreqHz, f)
		d.DiffDB = append(d.DiffDB, gb-ga)
		d.UDB = append(d.UDB, analysis.CoverageFactor*math.Hypot(ua.At(f), ub.At(f)))
	}
	return d, nil
}

// interpOf returns interpolants of a result's included gains and standard
// uncertainties.
func interpOf(r *analysis.Result) (g, u *analysis.Interpolant, err error) {
	var fs, gs, us []float64
	for _, s := range r.Samples {
		if s.Excluded || (len(fs) > 0 && s.FreqHz == fs[len(fs)-1]) {
			continue
		}
		fs, gs, us = append(fs, s.FreqHz), append(gs, s.GainDB), append(us, s.UDB)
	}
	if g, err = analysis.NewInterpolant(fs, gs); err != nil {
		return nil, nil, err
	}
	if u, err = analysis.NewInterpolant(fs, us); err != nil {
		return nil, nil, err
	}
	return g, u, nil
}

// DiffPlot writes the difference plot B − A (dB) with its uncertainty band
// and a zero line, for before/after comparisons. The zero PlotOptions
// gives an untitled plot of the default size.
func DiffPlot(w io.Writer, format string, po PlotOptions, a, b Series) error {
	d, err := Diff(a, b)
	if err != nil {
		return err
	}
	if len(d.FreqHz) < 2 {
		return fmt.Errorf("export: difference of %s and %s has %d points: want at least 2", b.Name, a.Name, len(d.FreqHz))
	}
	po = po.withDefaults()
	p := newPlot(po, fmt.Sprintf("%s − %s (dB)", b.Name, a.Name))
	var hi, lo, line plotter.XYs
	ylo, yhi := math.Inf(1), math.Inf(-1)
	for i, f := range d.FreqHz {
		line = append(line, plotter.XY{X: f, Y: d.DiffDB[i]})
		hi = append(hi, plotter.XY{X: f, Y: d.DiffDB[i] + d.UDB[i]})
		lo = append(lo, plotter.XY{X: f, Y: d.DiffDB[i] - d.UDB[i]})
		ylo, yhi = math.Min(ylo, d.DiffDB[i]-d.UDB[i]), math.Max(yhi, d.DiffDB[i]+d.UDB[i])
	}
	if hasWidth(hi, lo) {
		ring := append(plotter.XYs{}, hi...)
		for i := len(lo) - 1; i >= 0; i-- {
			ring = append(ring, lo[i])
		}
		if poly, err := plotter.NewPolygon(ring); err == nil {
			poly.Color = bandFill
			poly.LineStyle.Width = 0
			p.Add(poly)
			p.addLegend(fmt.Sprintf("uncertainty, k = %g", analysis.CoverageFactor), poly)
		}
	}
	x0, x1 := d.FreqHz[0], d.FreqHz[len(d.FreqHz)-1]
	zero, err := hline(0, x0, x1, darkGrey, vg.Points(0.8), []vg.Length{vg.Points(7), vg.Points(3)})
	if err != nil {
		return err
	}
	l, err := lineOf(line, ink, vg.Points(1.3), nil)
	if err != nil {
		return err
	}
	l.LineStyle = draw.LineStyle{Color: ink, Width: vg.Points(1.3)}
	p.Add(zero, l)
	p.addLegend("0 dB", zero)
	p.addLegend(b.Name+" − "+a.Name, l)
	ylo, yhi = math.Min(ylo, 0), math.Max(yhi, 0)
	span := math.Max(yhi-ylo, 0.1)
	p.X.Min, p.X.Max = x0, x1
	p.Y.Min, p.Y.Max = ylo-0.08*span, yhi+0.1*span
	placeLegend(p, po, line)
	return render(w, p.Plot, format, po)
}
