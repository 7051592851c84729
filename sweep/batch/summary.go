package batch

import (
	"fmt"
	"io"
	"math"
	"sort"
	"strings"
	"time"

	"rolloff/sweep/analysis"
	"rolloff/sweep/report"
)

// Type sizes (points) and greys of the summary.
const (
	bodyPt  = 8.0
	smallPt = 6.5
	inkText = 0
	inkMute = 85
	inkRule = 150
	inkGrid = 215
)

// WriteSummary writes batch-summary.pdf: the yield, an overlay of every
// unit with the mask, a strip plot of each figure with its limits, the
// statistics with Cpk, and the units that failed. software names the
// program in the footer.
func WriteSummary(w io.Writer, b *Batch, paper report.Paper, software string) error {
	var first time.Time
	for _, u := range b.Units {
		if t := u.In.Measured; !t.IsZero() && (first.IsZero() || t.Before(first)) {
			first = t
		}
	}
	d := report.NewDoc(paper, "Batch summary", first, func(d *report.Doc, page int) {
		d.Font(false, smallPt, inkMute)
		y := d.H - 14 + 1
		d.Text(d.Left, y, software+" · batch summary of "+plural(len(b.Units), "run"))
		d.TextRight(d.Right, y, fmt.Sprintf("page %d", page))
	})
	header(d, b)
	d.Y += 2
	d.Heading(d.Left, d.Right-d.Left, "Every unit")
	overlay(d, b)
	d.Y += 2
	d.Heading(d.Left, d.Right-d.Left, "Figures across the units")
	for i := range b.Figures {
		strip(d, b, &b.Figures[i])
	}
	d.Y += 2
	d.Heading(d.Left, d.Right-d.Left, "Statistics")
	table(d, b)
	d.Y += 1
	d.Font(false, smallPt, inkMute)
	d.Para(d.Left, d.Right-d.Left, "Cpk = min(USL − mean, mean − LSL) / (3 s), or the one-sided (USL − mean)/(3 s) or (mean − LSL)/(3 s) "+
		"where the mask sets one limit; s is the sample standard deviation (n − 1). Source: "+CpkSource+". "+
		"Limits derived from the mask: corners "+noteOf(b, "low corner")+"; peaking: "+noteOf(b, "peaking")+
		"; reference gain: "+noteOf(b, "reference gain")+". Cpk assumes a stable process with normally distributed figures.", 0)
	failures(d, b)
	return d.Output(w)
}

func noteOf(b *Batch, name string) string {
	for _, f := range b.Figures {
		if f.Name == name {
			return f.LimitNote
		}
	}
	return "—"
}

func plural(n int, s string) string {
	if n == 1 {
		return "1 " + s
	}
	return fmt.Sprintf("%d %ss", n, s)
}

func header(d *report.Doc, b *Batch) {
	boxW, boxH := 46.0, 19.0
	w := d.Right - d.Left - boxW - 4
	d.Font(true, 15, inkText)
	d.Text(d.Left, d.Y+5.5, "Batch summary")
	y := d.Y + 7.5
	batches := map[string]bool{}
	designs := map[string]bool{}
	for _, u := range b.Units {
		batches[u.In.Batch] = true
		designs[u.In.Design] = true
	}
	d.Font(true, 10.5, inkText)
	for _, l := range d.Wrap(strings.Join(keys(designs), ", "), w, 2) {
		d.Text(d.Left, y+d.LineH()*0.8, l)
		y += d.LineH()
	}
	d.Font(false, bodyPt, inkMute)
	mask := "no mask"
	if b.Mask != nil {
		mask = "mask " + maskName(b.Mask)
	}
	line := "batch " + strings.Join(keys(batches), ", ") + " · " + plural(len(b.Units), "unit") + " · " + mask
	if b.Reference != nil {
		line += " · reference unit " + b.Reference.Name()
	}
	for _, l := range d.Wrap(line, w, 3) {
		d.Text(d.Left, y+d.LineH()*0.8, l)
		y += d.LineH()
	}
	// The yield box.
	p := d.PDF()
	bx, by := d.Right-boxW, d.Y
	p.SetDrawColor(0, 0, 0)
	p.SetLineWidth(0.6)
	p.SetDashPattern(nil, 0)
	p.Rect(bx, by, boxW, boxH, "D")
	d.Font(true, smallPt, inkMute)
	d.Text(bx+(boxW-d.Width("YIELD"))/2, by+4, "YIELD")
	pct := fmt.Sprintf("%.1f %%", 100*b.Yield)
	d.Font(true, 18, inkText)
	d.Text(bx+(boxW-d.Width(pct))/2, by+11.5, pct)
	sub := fmt.Sprintf("%d of %d pass", b.Passed, len(b.Units))
	if b.Mask == nil {
		sub = fmt.Sprintf("%d of %d analysed (no mask)", b.Passed, len(b.Units))
	}
	d.Font(false, smallPt, inkText)
	d.Text(bx+(boxW-d.Width(sub))/2, by+16, sub)
	d.Y = math.Max(y, by+boxH) + 1
	d.Rule(d.Left, d.Right-d.Left, 0.5, inkText)
	d.Y += 0.5
}

func keys(m map[string]bool) []string {
	var out []string
	for k := range m {
		if k == "" {
			k = "—"
		}
		out = append(out, k)
	}
	sort.Strings(out)
	return out
}

func maskName(m *analysis.Mask) string {
	if m.Name != "" {
		return fmt.Sprintf("%q", m.Name)
	}
	return m.File
}

// overlay draws every unit's gain (relative to its reference level for a
// relative mask or none, absolute for an absolute mask), failing units
// darker, the reference unit black, and the mask.
func overlay(d *report.Doc, b *Batch) {
	const h = 62.0
	d.Ensure(h + 14)
	rel := b.Mask == nil || b.Mask.Relative
	loHz, hiHz := math.Inf(1), math.Inf(-1)
	loDB, hiDB := math.Inf(1), math.Inf(-1)
	type curve struct {
		hz, db []float64
		s      report.Stroke
	}
	var curves []curve
	add := func(u *Unit, s report.Stroke) {
		r := u.In.Result
		if r == nil {
			return
		}
		var c curve
		for _, smp := range r.Samples {
			if smp.Excluded {
				continue
			}
			g := smp.GainDB
			if rel {
				g -= r.ReferenceGainDB
			}
			c.hz, c.db = append(c.hz, smp.FreqHz), append(c.db, g)
			loHz, hiHz = math.Min(loHz, smp.FreqHz), math.Max(hiHz, smp.FreqHz)
			loDB, hiDB = math.Min(loDB, g), math.Max(hiDB, g)
		}
		c.s = s
		curves = append(curves, c)
	}
	for _, u := range b.Units {
		if u.Verdict != Fail {
			add(u, report.Stroke{Width: 0.12, Grey: 150})
		}
	}
	for _, u := range b.Units {
		if u.Verdict == Fail {
			add(u, report.Stroke{Width: 0.2, Grey: 40, Dash: []float64{1.2, 0.6}})
		}
	}
	if b.Reference != nil {
		add(b.Reference, report.Stroke{Width: 0.4, Grey: 0})
	}
	if m := b.Mask; m != nil {
		for _, line := range [][][2]float64{m.Upper, m.Lower} {
			for _, v := range line {
				if v[0] >= loHz && v[0] <= hiHz {
					loDB, hiDB = math.Min(loDB, v[1]), math.Max(hiDB, v[1])
				}
			}
		}
	}
	span := hiDB - loDB
	c := report.NewChart(d, d.Left+13, d.Y+2, d.Right-d.Left-13, h, loHz, hiHz, loDB-0.06*span, hiDB+0.1*span)
	title := "gain re reference (dB)"
	if !rel {
		title = "gain (dB)"
	}
	c.Frame(title)
	for _, cv := range curves {
		c.Line(cv.hz, cv.db, cv.s)
	}
	maskStroke := report.Stroke{Width: 0.7, Grey: 110}
	if m := b.Mask; m != nil {
		for _, line := range [][][2]float64{m.Upper, m.Lower} {
			var mh, md []float64
			for _, v := range line {
				mh, md = append(mh, v[0]), append(md, v[1])
			}
			c.Line(mh, md, maskStroke)
		}
	}
	d.Y = c.Y + c.H + 9
	items := []report.LegendItem{{Text: "passing unit", Draw: c.SampleLine(report.Stroke{Width: 0.12, Grey: 150})},
		{Text: "failing unit", Draw: c.SampleLine(report.Stroke{Width: 0.2, Grey: 40, Dash: []float64{1.2, 0.6}})}}
	if b.Reference != nil {
		items = append(items, report.LegendItem{Text: "reference unit " + b.Reference.Name(), Draw: c.SampleLine(report.Stroke{Width: 0.4, Grey: 0})})
	}
	if b.Mask != nil {
		items = append(items, report.LegendItem{Text: "mask", Draw: c.SampleLine(maskStroke)})
	}
	d.Y = c.Legend(d.Y, items) + 1
}

// fmtValue formats a figure's value in its unit.
func fmtValue(f *Figure, v float64, sig int) string {
	if math.IsNaN(v) {
		return "—"
	}
	if f.Unit == "Hz" {
		return analysis.FormatHz(v, sig)
	}
	return report.DB(v, 3) + " dB"
}

func fmtPtr(f *Figure, p *float64) string {
	if p == nil {
		return "—"
	}
	return fmtValue(f, *p, 4)
}

// strip draws one figure across the units: a dot per unit on a linear
// axis (failing units as crosses), the limits as heavy lines, the mean as
// a tall tick.
func strip(d *report.Doc, b *Batch, f *Figure) {
	const h = 11.0
	d.Ensure(h + 6)
	p := d.PDF()
	labelW := 30.0
	x0, x1 := d.Left+labelW, d.Right-2
	y0 := d.Y + 1
	d.Font(true, bodyPt, inkText)
	d.Text(d.Left, y0+4, f.Name)
	d.Font(false, smallPt, inkMute)
	d.Text(d.Left, y0+7.5, fmt.Sprintf("%d of %d units", f.Stats.N, len(b.Units)))
	lo, hi := f.Stats.Min, f.Stats.Max
	for _, l := range []*float64{f.LSL, f.USL} {
		if l != nil {
			lo, hi = math.Min(lo, *l), math.Max(hi, *l)
		}
	}
	if math.IsNaN(lo) {
		lo, hi = 0, 1
		if f.LSL != nil {
			lo = *f.LSL
		}
		if f.USL != nil {
			hi = *f.USL
		}
	}
	if !(hi > lo) {
		c := lo
		pad := math.Max(math.Abs(c)*1e-3, 1e-3)
		lo, hi = c-pad, c+pad
	}
	pad := 0.06 * (hi - lo)
	lo, hi = lo-pad, hi+pad
	px := func(v float64) float64 { return x0 + (x1-x0)*(v-lo)/(hi-lo) }
	// Axis with ticks.
	p.SetDrawColor(inkRule, inkRule, inkRule)
	p.SetLineWidth(0.2)
	p.SetDashPattern(nil, 0)
	p.Line(x0, y0+h-3, x1, y0+h-3)
	step := niceStep(hi - lo)
	d.Font(false, smallPt, inkMute)
	prevEnd := math.Inf(-1)
	for v := math.Ceil(lo/step) * step; v <= hi; v += step {
		x := px(v)
		p.SetDrawColor(inkGrid, inkGrid, inkGrid)
		p.Line(x, y0, x, y0+h-3)
		s := tickLabel(f, v, step)
		lx := math.Max(x0, math.Min(d.Right-d.Width(s), x-d.Width(s)/2))
		if lx > prevEnd+1.5 {
			d.Text(lx, y0+h, s)
			prevEnd = lx + d.Width(s)
		}
	}
	// Limits.
	for _, l := range []struct {
		v    *float64
		name string
	}{{f.LSL, "LSL"}, {f.USL, "USL"}} {
		if l.v == nil {
			continue
		}
		x := px(*l.v)
		p.SetDrawColor(60, 60, 60)
		p.SetLineWidth(0.6)
		p.Line(x, y0, x, y0+h-3)
		d.Font(true, smallPt, inkText)
		tx := x + 0.8
		if tx+d.Width(l.name) > x1 {
			tx = x - 0.8 - d.Width(l.name)
		}
		d.Text(tx, y0+2.2, l.name)
	}
	// Units, spread over the strip's height by a fixed sequence so that
	// equal values stay visible.
	for i, u := range b.Units {
		v := f.Values[i]
		if math.IsNaN(v) {
			continue
		}
		x := px(v)
		y := y0 + 1.5 + math.Mod(float64(i)*0.618034, 1)*(h-5.5)
		if u.Verdict == Fail {
			p.SetDrawColor(0, 0, 0)
			p.SetLineWidth(0.2)
			p.Line(x-0.7, y-0.7, x+0.7, y+0.7)
			p.Line(x-0.7, y+0.7, x+0.7, y-0.7)
		} else {
			p.SetFillColor(70, 70, 70)
			p.Circle(x, y, 0.45, "F")
		}
	}
	if m := f.Stats.Mean; !math.IsNaN(m) {
		x := px(m)
		p.SetDrawColor(0, 0, 0)
		p.SetLineWidth(0.35)
		p.Line(x, y0-0.5, x, y0+h-2.5)
	}
	d.Y = y0 + h + 2
}

func niceStep(span float64) float64 {
	raw := span / 6
	e := math.Pow(10, math.Floor(math.Log10(raw)))
	for _, m := range []float64{1, 2, 5, 10} {
		if m*e >= raw {
			return m * e
		}
	}
	return 10 * e
}

func tickLabel(f *Figure, v, step float64) string {
	if f.Unit == "Hz" {
		return analysis.FormatHz(v, 4)
	}
	dec := 0
	if step < 1 {
		dec = int(math.Ceil(-math.Log10(step) - 1e-9))
	}
	return report.DB(v, dec)
}

// table writes the statistics of every figure.
func table(d *report.Doc, b *Batch) {
	cols := []string{"figure", "n", "mean", "s", "min", "max", "LSL", "USL", "Cpk"}
	widths := []float64{24, 8, 22, 20, 22, 22, 22, 22, 14}
	total := 0.0
	for _, w := range widths {
		total += w
	}
	scale := (d.Right - d.Left) / total
	row := func(cells []string, bold bool) {
		d.Font(bold, bodyPt, inkText)
		lh := d.LineH()
		d.Ensure(lh)
		x := d.Left
		for i, c := range cells {
			w := widths[i] * scale
			s := d.Wrap(c, w-1.5, 1)[0]
			if i == 0 {
				d.Text(x, d.Y+lh*0.78, s)
			} else {
				d.TextRight(x+w-1.5, d.Y+lh*0.78, s)
			}
			x += w
		}
		d.Y += lh
	}
	row(cols, true)
	d.Rule(d.Left, d.Right-d.Left, 0.2, inkRule)
	for i := range b.Figures {
		f := &b.Figures[i]
		s := f.Stats
		sd := "—"
		if !math.IsNaN(s.SD) {
			if f.Unit == "Hz" {
				sd = analysis.FormatHz(s.SD, 3)
			} else {
				sd = report.DB(s.SD, 3) + " dB"
			}
		}
		cpk := "—"
		if !math.IsNaN(f.Cpk) {
			cpk = fmt.Sprintf("%.2f", f.Cpk)
		}
		row([]string{f.Name, fmt.Sprint(s.N), fmtValue(f, s.Mean, 5), sd, fmtValue(f, s.Min, 5), fmtValue(f, s.Max, 5),
			fmtPtr(f, f.LSL), fmtPtr(f, f.USL), cpk}, false)
	}
}

// failures lists the units that failed the mask or could not be
// analysed, at most 40 (the CSV has them all).
func failures(d *report.Doc, b *Batch) {
	var bad []*Unit
	for _, u := range b.sortedUnits() {
		if u.Verdict == Fail || u.Verdict == Error {
			bad = append(bad, u)
		}
	}
	if len(bad) == 0 {
		return
	}
	d.Y += 2
	d.Heading(d.Left, d.Right-d.Left, "Units that failed")
	var rows []report.Row
	for i, u := range bad {
		if i == 40 {
			rows = append(rows, report.Row{Key: "…", Value: fmt.Sprintf("and %d more: see %s", len(bad)-40, FileCSV)})
			break
		}
		s := "not analysed: " + u.In.AnalysisErr
		if r := u.In.Result; r != nil && r.Mask != nil {
			s = fmt.Sprintf("%d of %d points outside", r.Mask.Failed, r.Mask.Checked)
			if v := r.Mask; v.WorstMarginDB != nil {
				s += fmt.Sprintf("; worst margin %s dB at %s (%s limit)", report.DB(*v.WorstMarginDB, 3), analysis.FormatHz(*v.WorstHz, 4), v.WorstLimit)
			}
		}
		rows = append(rows, report.Row{Key: u.Name(), Value: s + " · run " + u.In.RunID})
	}
	d.Fields(d.Left, d.Right-d.Left, 30, rows, 2)
}
