package report

import (
	"fmt"
	"math"

	"rolloff/sweep/analysis"
)

// Plot styles: the measured curve black, the analysed curve dark grey,
// the reference and corner-level lines dashed, the mask heavy and grey,
// flagged points open squares.
var (
	strokeCurve = Stroke{Width: 0.35, Grey: inkText}
	strokeModel = Stroke{Width: 0.25, Grey: inkMuted, Dash: []float64{1.6, 0.8}}
	strokeRef   = Stroke{Width: 0.2, Grey: inkMuted, Dash: []float64{2.4, 1.2}}
	strokeLevel = Stroke{Width: 0.2, Grey: inkMuted, Dash: []float64{0.5, 0.8}}
	strokeMask  = Stroke{Width: 0.7, Grey: 110}
	strokeDrop  = Stroke{Width: 0.15, Grey: inkMuted, Dash: []float64{0.4, 0.6}}
)

// plotH is the height of the report's plot area, mm.
const plotH = 66.0

// plotBlock draws the Bode plot of the gain.
func plotBlock(d *Doc, in *Input) {
	d.Heading(d.Left, d.Right-d.Left, "Gain")
	h := plotH + 16
	d.Ensure(h)
	c := ResponseChart(d, d.Left+13, d.Y+2, d.Right-d.Left-13, plotH, in)
	d.Y = c.Y + c.H + 9
	d.Y = c.Legend(d.Y, legend(c, in)) + 1
}

// ResponseChart draws one response's Bode plot in the area (x, y, w, h):
// the uncertainty band (gain ± k·u of each used point), the measured
// points joined, flagged points apart as open squares, the analysed
// curve, the reference and corner-level lines, the corners with their
// values and the mask with its worst point.
func ResponseChart(d *Doc, x, y, w, h float64, in *Input) *Chart {
	r := in.Result
	var hz, db, lo, hi, xhz, xdb []float64
	var samples []analysis.Sample
	if r != nil {
		samples = r.Samples
	} else {
		for _, p := range in.Points {
			g, ok := analysis.GainOf(p)
			if !ok {
				continue
			}
			samples = append(samples, analysis.Sample{FreqHz: p.FreqHz, GainDB: g, Excluded: p.Excluded()})
		}
	}
	k := analysis.CoverageFactor
	for _, s := range samples {
		if !inX(s.FreqHz) || !finite(s.GainDB) {
			continue
		}
		if s.Excluded {
			xhz, xdb = append(xhz, s.FreqHz), append(xdb, s.GainDB)
			continue
		}
		hz, db = append(hz, s.FreqHz), append(db, s.GainDB)
		lo, hi = append(lo, s.GainDB-k*s.UDB), append(hi, s.GainDB+k*s.UDB)
	}
	// Axes: the used points, the threshold and the mask where it lies
	// within the sweep; flagged points only widen the frequency axis.
	loHz, hiHz := math.Inf(1), math.Inf(-1)
	loDB, hiDB := math.Inf(1), math.Inf(-1)
	for i := range hz {
		loHz, hiHz = math.Min(loHz, hz[i]), math.Max(hiHz, hz[i])
		loDB, hiDB = math.Min(loDB, lo[i]), math.Max(hiDB, hi[i])
	}
	for _, f := range xhz {
		loHz, hiHz = math.Min(loHz, f), math.Max(hiHz, f)
	}
	if len(hz) == 0 {
		for _, v := range xdb {
			loDB, hiDB = math.Min(loDB, v), math.Max(hiDB, v)
		}
	}
	var mask *analysis.Mask
	var offset float64
	if r != nil {
		loDB, hiDB = math.Min(loDB, r.ThresholdDB), math.Max(hiDB, r.ReferenceGainDB)
		if mask = in.maskDrawn(); mask != nil && mask.Relative {
			offset = r.ReferenceGainDB
		}
	}
	if mask != nil {
		for _, line := range [][][2]float64{mask.Upper, mask.Lower} {
			for _, v := range line {
				if v[0] >= loHz && v[0] <= hiHz {
					loDB, hiDB = math.Min(loDB, v[1]+offset), math.Max(hiDB, v[1]+offset)
				}
			}
		}
	}
	span := hiDB - loDB
	loDB, hiDB = loDB-0.06*span, hiDB+0.1*span
	c := NewChart(d, x, y, w, h, loHz, hiHz, loDB, hiDB)
	c.Frame("gain (dB)")

	c.Band(hz, lo, hi, inkBand)
	if r != nil {
		c.HLine(r.ReferenceGainDB, strokeRef, "reference "+DB(r.ReferenceGainDB, 2)+" dB")
		c.HLine(r.ThresholdDB, strokeLevel, fmt.Sprintf("%s dB", DB(r.LevelDB, 2)))
	}
	if mask != nil {
		for _, line := range [][][2]float64{mask.Upper, mask.Lower} {
			var mh, md []float64
			for _, v := range line {
				mh, md = append(mh, v[0]), append(md, v[1]+offset)
			}
			c.Line(mh, md, strokeMask)
		}
	}
	c.Line(hz, db, strokeCurve)
	if len(hz) <= 400 {
		c.Marks(hz, db, Dot, 0.75, inkText)
	}
	if r != nil && r.Model != nil && r.Model.Accepted {
		// The fitted model, dashed over the points, on a grid of about
		// 300 frequencies.
		n := 300
		var mh, md []float64
		for i := 0; i <= n; i++ {
			f := r.SweepHz[0] * math.Pow(r.SweepHz[1]/r.SweepHz[0], float64(i)/float64(n))
			mh, md = append(mh, f), append(md, r.Model.At(f))
		}
		c.Line(mh, md, strokeModel)
	}
	c.Marks(xhz, xdb, Square, 1.3, inkMuted)
	if r != nil {
		corner := func(hz, u *float64, name string) {
			if hz == nil {
				return
			}
			c.VLine(*hz, r.ThresholdDB, strokeDrop)
			c.Mark(*hz, r.ThresholdDB, Diamond, 1.8, inkText)
			s := name + " " + analysis.FormatHz(*hz, 4)
			if u != nil && *u > 0 {
				s = name + " " + analysis.FormatWithU(*hz, *u)
			}
			c.Label(c.PX(*hz), c.PY(r.ThresholdDB)+3.2, s, inkText)
		}
		corner(r.LowHz, r.LowUHz, "low")
		corner(r.HighHz, r.HighUHz, "high")
		if v := r.Mask; v != nil && v.WorstHz != nil && v.WorstMarginDB != nil {
			for _, mp := range v.Points {
				if mp.FreqHz == *v.WorstHz {
					g := mp.GainDB
					if v.Relative {
						g += r.ReferenceGainDB
					}
					c.Mark(mp.FreqHz, g, Cross, 2.2, inkText)
					c.Label(c.PX(mp.FreqHz), c.PY(g)-2, "worst "+signedDB(*v.WorstMarginDB, 2)+" dB", inkText)
					break
				}
			}
		}
	}
	return c
}

func legend(c *Chart, in *Input) []LegendItem {
	items := []LegendItem{{Text: "measured gain", Draw: c.SampleLine(strokeCurve)},
		{Text: fmt.Sprintf("uncertainty band (k = %g)", analysis.CoverageFactor), Draw: c.SampleBand(inkBand)}}
	r := in.Result
	if r != nil && r.Model != nil && r.Model.Accepted {
		items = append(items, LegendItem{Text: "fitted model", Draw: c.SampleLine(strokeModel)})
	}
	if r != nil {
		items = append(items, LegendItem{Text: "reference", Draw: c.SampleLine(strokeRef)},
			LegendItem{Text: "corner level", Draw: c.SampleLine(strokeLevel)})
		if r.LowHz != nil || r.HighHz != nil {
			items = append(items, LegendItem{Text: "corner", Draw: c.SampleMark(Diamond, 1.8, inkText)})
		}
		if in.maskDrawn() != nil {
			items = append(items, LegendItem{Text: "mask", Draw: c.SampleLine(strokeMask)},
				LegendItem{Text: "worst margin", Draw: c.SampleMark(Cross, 2.2, inkText)})
		}
	}
	n := 0
	for _, p := range in.Points {
		if p.Excluded() {
			n++
		}
	}
	if n > 0 {
		items = append(items, LegendItem{Text: fmt.Sprintf("flagged, left out (%d)", n), Draw: c.SampleMark(Square, 1.3, inkMuted)})
	}
	return items
}
