package analysis

import (
	"math"
	"sort"

	"rolloff/sweep/point"
)

// Spec is the measuring chain's specification split by what each error is
// common to (JCGM 100:2008 §5.2: correlated inputs), for the corner
// budgets. Every figure is the half-width of a ± limit, read as a
// rectangular distribution (JCGM 100:2008 §4.3.7). A nil Options.Spec
// leaves the budget with the points' own converter figure
// (point.ConvAccRel), taken as common to the readings on one range with
// the same figure.
type Spec struct {
	// ConverterRangeGainRel is the converter's range-gain error, a
	// fraction of reading common to every reading on one range.
	ConverterRangeGainRel float64 `json:"converter_range_gain_rel"`
	// ConverterLinearityFS is the converter's end-point linearity, a
	// fraction of full scale: a reading at fraction x of scale is off by
	// 4·(1−x)·ConverterLinearityFS of itself (the parabola the profiles
	// describe).
	ConverterLinearityFS float64 `json:"converter_linearity_fs"`
	// ConverterFlatness are the converter's flatness bands, first match
	// wins; readings in one band share one error.
	ConverterFlatness []SpecBand `json:"converter_flatness"`
	// GeneratorAmplitudeRel is the generator's amplitude error, a
	// fraction of the setting common to every frequency.
	GeneratorAmplitudeRel float64 `json:"generator_amplitude_rel"`
	// GeneratorFlatness are the generator's flatness bands.
	GeneratorFlatness []SpecBand `json:"generator_flatness"`
	// VinMeasured says the input level was measured at each point (not
	// the generator's setting), so that the generator's errors drop out.
	VinMeasured bool `json:"vin_measured"`
	// SettleTolRel bounds what is left of a reading's settling: the
	// relative agreement the readings were accepted at.
	SettleTolRel float64 `json:"settle_tol_rel"`
	// RippleRel bounds the residual ripple of a reading over the chosen
	// aperture, a fraction of reading.
	RippleRel float64 `json:"ripple_rel"`
}

// SpecBand is one band of a flatness specification: ±Rel (a fraction of
// reading) from FromHz to ToHz inclusive, on the converter ranges listed
// by index (every range when empty).
type SpecBand struct {
	Ranges []int   `json:"ranges,omitempty"`
	FromHz float64 `json:"from_hz"`
	ToHz   float64 `json:"to_hz"`
	Rel    float64 `json:"rel"`
}

func bandOf(bands []SpecBand, rangeIndex int, freqHz float64) int {
	for k, b := range bands {
		if freqHz < b.FromHz || freqHz > b.ToHz {
			continue
		}
		match := len(b.Ranges) == 0
		for _, r := range b.Ranges {
			match = match || r == rangeIndex
		}
		if match {
			return k
		}
	}
	return -1
}

// Distributions of a budget's inputs.
const (
	DistRectangular = "rectangular"
	DistNormal      = "normal"
	// DistArcsine is the U-shaped distribution of a sine of amplitude a
	// read at a random phase: u = a/√2 (JCGM 101:2008 §6.4.6, from
	// memory).
	DistArcsine = "arcsine"
)

// BudgetEntry is one row of a corner's uncertainty budget (JCGM 100:2008
// §5.1.3 and §7.2.5): an input quantity, its distribution and standard
// uncertainty U (in Unit), the sensitivity coefficient of the corner to
// it (Hz per Unit, through the local slope and the reference; for a
// component of several independent errors, such as one per point or one
// per band, the root-sum-square of theirs divided by U) and the
// contribution to the corner's standard uncertainty, Hz.
type BudgetEntry struct {
	Name           string  `json:"name"`
	Distribution   string  `json:"distribution"`
	U              float64 `json:"u"`
	Unit           string  `json:"unit"`
	Sensitivity    float64 `json:"sensitivity"`
	ContributionHz float64 `json:"contribution_hz"`
	Note           string  `json:"note,omitempty"`
}

// group is one independent error: drawn once (rectangular of half-width
// a, or normal of standard deviation a) and shifting the gains of the
// samples idx by val·e dB.
type group struct {
	dist string
	a    float64
	idx  []int
	val  []float64
}

func (g group) u() float64 {
	switch g.dist {
	case DistRectangular:
		return g.a / math.Sqrt(3)
	case DistArcsine:
		return g.a / math.Sqrt2
	}
	return g.a
}

// component is a named input of the budget: independent groups, or a
// direct standard uncertainty of ln fc for each corner (the fit's Type A
// part, the interpolation's method error).
type component struct {
	name, dist, unit, note string
	groups                 []group
	direct                 [2]float64 // standard uncertainty of ln fc, low and high corner
	uShow                  [2]float64 // the input's u as shown, per corner
}

// budgetInputs is what the budget and the Monte Carlo draw from.
type budgetInputs struct {
	c       curve
	xs      []float64
	refXs   []float64
	levelDB float64
	x0, x1  float64
	corners [2]*float64 // log10 f of the low and high corner
	comps   []component
	// shift, for a fitted model, is the change of ln fc of corner side
	// when the samples shift by d (dB): the shift goes through the fit,
	// so that an error on points far from the corner (another range, a
	// flatness band beyond it) moves the model there. Nil for an
	// interpolant, where a shift acts locally (see perturbed).
	shift func(side int, d []float64) float64
}

// perturbed returns the corner near xc of c + δ, δ the piecewise linear
// interpolation of d over the samples, the level moved with δ at the
// reference; ok is false when no crossing is found nearby.
func (b *budgetInputs) perturbed(xc float64, d []float64) (float64, bool) {
	var dref float64
	for _, x := range b.refXs {
		dref += linearAt(b.xs, d, x)
	}
	dref /= float64(len(b.refXs))
	ref := 0.0
	for _, x := range b.refXs {
		ref += b.c.atLog(x)
	}
	ref /= float64(len(b.refXs))
	level := ref + dref + b.levelDB
	g := func(x float64) float64 {
		x = clamp(x, b.x0, b.x1)
		return b.c.atLog(x) + linearAt(b.xs, d, x) - level
	}
	// The nearest sign change of g within half a decade, then
	// bisection: δ is only piecewise linear, so Newton's steps could
	// stall at its kinks.
	g0 := g(xc)
	if g0 == 0 {
		return xc, true
	}
	const step = 0.002
	for k := 1; k <= 250; k++ {
		for _, dir := range []float64{1, -1} {
			xa, xb := xc+dir*float64(k-1)*step, xc+dir*float64(k)*step
			if xb < b.x0 || xb > b.x1 {
				continue
			}
			ga, gb := g(xa), g(xb)
			if ga*gb > 0 {
				continue
			}
			for it := 0; it < 60 && math.Abs(xb-xa) > 1e-13; it++ {
				xm := (xa + xb) / 2
				gm := g(xm)
				if (gm > 0) == (ga > 0) {
					xa, ga = xm, gm
				} else {
					xb = xm
				}
			}
			return (xa + xb) / 2, true
		}
	}
	return xc, false
}

// groupShift returns the change of ln fc of corner side, through the fit
// (b.shift), when group g's error is one unit: each of its samples moves
// by its coefficient. d is scratch space, one per sample.
func (b *budgetInputs) groupShift(side int, g group, d []float64) float64 {
	clear(d)
	for k, i := range g.idx {
		d[i] = g.val[k]
	}
	return b.shift(side, d)
}

// sensitivity returns ∂fc/∂e (Hz per unit of the group's error) at the
// corner of side (0 low, 1 high): through the fit for a model (linear);
// for an interpolant, as the central difference of the perturbed corner over
// e = ±u(e): c·u = [f(x + u) − f(x − u)]/2 (JCGM 100:2008 §5.1.3 Note 2,
// from memory). A step of the input's own size, not an infinitesimal
// one: between densely spaced, noisy points the interpolant's local
// slope changes from one interval to the next, and a derivative taken
// inside one interval misstates what an error of the input's size does
// to the corner (the Monte Carlo draws see the secant). Where the ±u
// step loses the crossing, the step is halved down to u/1000.
func (b *budgetInputs) sensitivity(side int, g group) float64 {
	xc := *b.corners[side]
	e := g.u()
	if !(e > 0) {
		return 0
	}
	d := make([]float64, len(b.xs))
	if b.shift != nil {
		return math.Pow(10, xc) * b.groupShift(side, g, d)
	}
	for try := 0; try < 11; try++ {
		for k := range d {
			d[k] = 0
		}
		for k, i := range g.idx {
			d[i] = g.val[k] * e
		}
		xp, ok1 := b.perturbed(xc, d)
		for k := range d {
			d[k] = -d[k]
		}
		xm, ok2 := b.perturbed(xc, d)
		if ok1 && ok2 {
			return (math.Pow(10, xp) - math.Pow(10, xm)) / (2 * e)
		}
		e /= 2
	}
	return math.NaN()
}

// table returns the budget of corner side (0 low, 1 high) and the
// combined standard uncertainty, Hz.
func (b *budgetInputs) table(side int) ([]BudgetEntry, float64) {
	xc := *b.corners[side]
	fc := math.Pow(10, xc)
	out := []BudgetEntry{}
	var sum2 float64
	for _, c := range b.comps {
		var c2 float64
		for _, g := range c.groups {
			s := b.sensitivity(side, g)
			if math.IsNaN(s) {
				continue
			}
			c2 += s * s * g.u() * g.u()
		}
		c2 += c.direct[side] * fc * c.direct[side] * fc
		contrib := math.Sqrt(c2)
		e := BudgetEntry{Name: c.name, Distribution: c.dist, U: c.uShow[side], Unit: c.unit, ContributionHz: contrib, Note: c.note}
		if e.U > 0 {
			e.Sensitivity = contrib / e.U
		}
		out = append(out, e)
		sum2 += c2
	}
	return out, math.Sqrt(sum2)
}

// budget builds the correlated budget of the reported corners on curve c
// and replaces their expanded uncertainties by the budget's; pts are the
// points given to Analyze, refXs the reference abscissae (one, or a band).
func (a *analysis) budget(r *Result, pts []point.Point, c curve, refXs []float64) {
	b := &budgetInputs{c: c, xs: a.xs, refXs: refXs, levelDB: a.o.LevelDB, x0: a.x0, x1: a.x1}
	if r.LowHz != nil {
		b.corners[0] = ptr(log10(*r.LowHz))
	}
	if r.HighHz != nil {
		b.corners[1] = ptr(log10(*r.HighHz))
	}
	if b.corners[0] == nil && b.corners[1] == nil {
		return
	}
	n := len(a.inc)
	pt := func(i int) point.Point {
		if p := a.inc[i].Pos; p >= 0 && p < len(pts) {
			return pts[p]
		}
		return point.Point{}
	}
	nearest := func(side int) int {
		if b.corners[side] == nil {
			return 0
		}
		i := sort.SearchFloat64s(a.xs, *b.corners[side])
		if i >= n {
			i = n - 1
		}
		if i > 0 && math.Abs(a.xs[i-1]-*b.corners[side]) < math.Abs(a.xs[i]-*b.corners[side]) {
			i--
		}
		return i
	}
	show := func(f func(i int) float64) [2]float64 {
		return [2]float64{f(nearest(0)), f(nearest(1))}
	}
	keyed := func(name, note string, key func(i int) (k int, a float64, ok bool), scale func(i int) float64) component {
		cm := component{name: name, dist: DistRectangular, unit: "relative", note: note}
		idx := map[int]int{}
		for i := 0; i < n; i++ {
			k, half, ok := key(i)
			if !ok || !(half > 0) {
				continue
			}
			j, seen := idx[k]
			if !seen {
				j = len(cm.groups)
				idx[k] = j
				cm.groups = append(cm.groups, group{dist: DistRectangular, a: half})
			}
			cm.groups[j].idx = append(cm.groups[j].idx, i)
			cm.groups[j].val = append(cm.groups[j].val, dbPerRel*scale(i))
		}
		cm.uShow = show(func(i int) float64 {
			if _, half, ok := key(i); ok {
				return rect(half) * scale(i)
			}
			return 0
		})
		return cm
	}
	one := func(int) float64 { return 1 }
	sp := a.o.Spec
	if sp != nil {
		b.comps = append(b.comps,
			keyed("converter range gain", "common to the readings on one range: cancels between the reference and a corner on the same range",
				func(i int) (int, float64, bool) { return pt(i).RangeIndex, sp.ConverterRangeGainRel, true }, one),
			keyed("converter flatness", "common to the readings in one band",
				func(i int) (int, float64, bool) {
					k := bandOf(sp.ConverterFlatness, pt(i).RangeIndex, a.inc[i].FreqHz)
					if k < 0 {
						return 0, 0, false
					}
					return k, sp.ConverterFlatness[k].Rel, true
				}, one),
			keyed("converter linearity", "one end-point error, 4·(1−x) of a reading at fraction x of scale",
				func(i int) (int, float64, bool) { return 0, sp.ConverterLinearityFS, pt(i).FractionFS > 0 },
				func(i int) float64 { return 4 * (1 - clamp(pt(i).FractionFS, 0, 1)) }))
	} else {
		// Without the split nothing says which readings share an error:
		// each point's figure is taken as its own (the cautious reading:
		// no cancellation between the reference and a corner).
		// The figure at the corner and at the reference combine in
		// quadrature (as the points' own, uncorrelated).
		cm := keyed("converter accuracy", "no component split given: each point's figure, the corner's and the reference's uncorrelated",
			func(i int) (int, float64, bool) { return i, pt(i).ConvAccRel, true }, one)
		cm.groups = nil
		us := make([]float64, n)
		for i := range us {
			us[i] = dbPerRel * rect(pt(i).ConvAccRel)
		}
		var ur float64
		for _, x := range refXs {
			ur += linearAt(a.xs, us, x) / float64(len(refXs))
		}
		for side := 0; side < 2; side++ {
			if b.corners[side] != nil {
				xc := *b.corners[side]
				if perLn := math.Abs(c.slopeLog(xc)) / math.Ln10; perLn > 0 {
					cm.direct[side] = math.Hypot(linearAt(a.xs, us, xc), ur) / perLn
				}
			}
		}
		b.comps = append(b.comps, cm)
	}
	dc := keyed("DC voltmeter gain and offset", "one range for the run: its errors, relative to each DC reading",
		func(i int) (int, float64, bool) {
			p := pt(i)
			return 0, 1, p.DCVolts > 0 && p.DCAccV > 0 && !math.IsInf(p.DCVolts, 0)
		}, func(i int) float64 {
			p := pt(i)
			if p.DCVolts > 0 {
				return p.DCAccV / p.DCVolts
			}
			return 0
		})
	b.comps = append(b.comps, dc)
	if sp != nil {
		gen := "cancels between frequencies at one setting"
		genOff := r.Through || sp.VinMeasured
		if genOff {
			gen = "cancelled by the through run or the measured input"
		}
		half := sp.GeneratorAmplitudeRel
		if genOff {
			half = 0
		}
		b.comps = append(b.comps,
			keyed("generator amplitude", gen, func(int) (int, float64, bool) { return 0, half, true }, one))
		fl := keyed("generator flatness", "common to the frequencies in one band",
			func(i int) (int, float64, bool) {
				k := bandOf(sp.GeneratorFlatness, -1, a.inc[i].FreqHz)
				if k < 0 || genOff {
					return 0, 0, false
				}
				return k, sp.GeneratorFlatness[k].Rel, true
			}, one)
		if genOff {
			fl.note = gen
		}
		b.comps = append(b.comps, fl)
		// The ripple left by each point's aperture, where the points
		// record it; else the specification's bound.
		ripple := keyed("ripple residual", "the converter's 2f ripple left by each point's aperture, read at a random phase, independent from point to point",
			func(i int) (int, float64, bool) {
				if r := pt(i).RippleRel; r > 0 {
					return i, r, true
				}
				return i, sp.RippleRel, true
			}, one)
		ripple.dist = DistArcsine
		for gi := range ripple.groups {
			ripple.groups[gi].dist = DistArcsine
		}
		ripple.uShow = show(func(i int) float64 {
			if r := pt(i).RippleRel; r > 0 {
				return r / math.Sqrt2
			}
			return sp.RippleRel / math.Sqrt2
		})
		settleRes := keyed("settle residual", "what the converter's approach leaves in each point's reading (its model, τ taken 20 % longer, at most the settling tolerance), independent from point to point",
			func(i int) (int, float64, bool) {
				if r := pt(i).SettleResidualRel; r != nil {
					return i, *r, true
				}
				return i, sp.SettleTolRel, true
			}, one)
		b.comps = append(b.comps, settleRes, ripple)
	}
	// A fitted model takes every shift of the data through the fit
	// (JCGM 100:2008 §H.3): errors independent from point to point are
	// averaged as the readings' scatter is, and an error common to a
	// range or a band moves the model wherever it bends to follow it.
	if m, ok := c.(*Model); ok && a.cov != nil && r.Model != nil {
		cv := a.cov
		fitD := make([]float64, len(cv.xs))
		b.shift = func(side int, d []float64) float64 {
			for i, x := range cv.xs {
				fitD[i] = linearAt(a.xs, d, x)
			}
			return cv.cornerShift(m, *b.corners[side], refXs, fitD)
		}
		for ci := range b.comps {
			if n := b.comps[ci].name; n == "settle residual" || n == "ripple residual" {
				b.comps[ci].note += "; averaged by the fit"
			}
		}
	}
	// Type A.
	ta := component{name: "type A", dist: DistNormal, unit: "dB"}
	if m, ok := c.(*Model); ok && a.cov != nil && r.Model != nil {
		ta.unit = "ln Hz"
		ta.note = "the readings' scatter through the fit's covariance"
		f := a.typeAScale(r.Model)
		for side := 0; side < 2; side++ {
			if b.corners[side] != nil {
				u := a.cov.cornerU(m, *b.corners[side], refXs) * f
				if !math.IsNaN(u) {
					ta.direct[side] = u
					ta.uShow[side] = u
				}
			}
		}
	} else {
		ta.note = "the readings' scatter (or the noise estimated from the data), independent from point to point"
		for i := 0; i < n; i++ {
			u := math.Hypot(a.inc[i].UADB, a.noiseDB)
			if u > 0 {
				ta.groups = append(ta.groups, group{dist: DistNormal, a: u, idx: []int{i}, val: []float64{1}})
			}
		}
		ta.uShow = show(func(i int) float64 { return math.Hypot(a.inc[i].UADB, a.noiseDB) })
		me := component{name: "interpolation method", dist: DistNormal, unit: "ln Hz", note: "spread of other interpolants' crossings"}
		for side := 0; side < 2; side++ {
			if b.corners[side] != nil {
				u := methodU(a.xs, a.ys, *b.corners[side], c.atLog(*b.corners[side]))
				me.direct[side], me.uShow[side] = u, u
			}
		}
		b.comps = append(b.comps, me)
	}
	b.comps = append(b.comps, ta)

	for side := 0; side < 2; side++ {
		if b.corners[side] == nil {
			continue
		}
		tab, uc := b.table(side)
		U := CoverageFactor * uc
		if side == 0 {
			r.LowBudget = tab
			if !math.IsNaN(U) {
				r.LowUHz = ptr(U)
			}
		} else {
			r.HighBudget = tab
			if !math.IsNaN(U) {
				r.HighUHz = ptr(U)
			}
		}
	}
	r.budget = b
	r.Spec = sp
}

// typeAScale is the factor that takes the fit's covariance (weighted by
// the points' whole uncertainty, scaled by the Birge ratio) to the
// readings' scatter alone: with declared Type A parts a fraction ρ of
// each point's uncertainty, C_A = C · √(max(ρ², s)/max(1, s)) in standard
// uncertainty, s = χ²/(n−k) (the same least-squares form as the
// covariance, JCGM 100:2008 §H.3). Without declared noise the fit's
// residual already is the scatter.
func (a *analysis) typeAScale(m *ModelResult) float64 {
	if !m.NoiseDeclared {
		return 1
	}
	var rho2 float64
	k := 0
	for _, s := range a.inc {
		if s.UDB > 0 {
			rho2 += (s.UADB / s.UDB) * (s.UADB / s.UDB)
			k++
		}
	}
	if k == 0 {
		return 1
	}
	rho2 /= float64(k)
	s := a.birge(m)
	return math.Sqrt(math.Max(rho2, s) / math.Max(1, s))
}

// birge is the fit's χ²/(n−k) (1 when there are no degrees of freedom
// left).
func (a *analysis) birge(m *ModelResult) float64 {
	n := float64(m.FitPoints)
	dof := n - float64(len(a.cov.theta)) - 1
	if dof < 1 || !m.NoiseDeclared {
		return 1
	}
	return m.ReducedChi * m.ReducedChi * n / dof
}

// refXs returns the reference abscissae of an estimation: its reference
// frequency, or 17 points across the reference band.
func (e estimation) refXs(a *analysis) []float64 {
	if a.o.RefMode != RefBand {
		return []float64{e.xRef}
	}
	xa, xb := clamp(log10(a.o.BandLoHz), a.x0, a.x1), clamp(log10(a.o.BandHiHz), a.x0, a.x1)
	out := make([]float64, 0, 17)
	for i := 0; i <= 16; i++ {
		out = append(out, xa+(xb-xa)*float64(i)/16)
	}
	return out
}
