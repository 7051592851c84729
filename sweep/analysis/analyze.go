package analysis

import (
	"errors"
	"fmt"
	"math"
	"sort"

	"rolloff/sweep/point"
)

func log10(v float64) float64 { return math.Log10(v) }

// Analyze computes the figures of a measured response. Points may come in
// any order; flagged points (point.Point.Excluded) and points the analysis
// cannot use are left out and listed in Result.Excluded.
func Analyze(pts []point.Point, opts Options) (*Result, error) {
	o, err := opts.withDefaults()
	if err != nil {
		return nil, err
	}
	samples, err := BuildSamples(pts, o.Through)
	if err != nil {
		return nil, err
	}
	r := &Result{Points: len(pts), LevelDB: o.LevelDB, ReferenceMode: o.RefMode, CoverageFactor: CoverageFactor,
		Through: len(o.Through) > 0, Samples: samples, Excluded: []ExcludedPoint{}, Crossings: []Crossing{}}
	var inc, checks []Sample
	for _, s := range samples {
		if isDriftCheck(s) {
			checks = append(checks, s)
			continue
		}
		if s.Excluded {
			r.Excluded = append(r.Excluded, ExcludedPoint{Seq: s.Seq, FreqHz: s.FreqHz, Reasons: append([]string{}, s.Reasons...)})
			continue
		}
		inc = append(inc, s)
	}
	r.Points -= len(checks)
	inc = mergeSameFrequency(inc)
	r.Included = len(inc)
	if len(inc) < 3 {
		return nil, fmt.Errorf("%w: %d usable points (of %d): want at least 3 at distinct frequencies", ErrResponse, len(inc), len(pts))
	}
	xs := make([]float64, len(inc))
	ys := make([]float64, len(inc))
	us := make([]float64, len(inc))
	for i, s := range inc {
		xs[i], ys[i], us[i] = log10(s.FreqHz), s.GainDB, s.UDB
	}
	it, err := newInterpolantLog(xs, ys)
	if err != nil {
		return nil, err
	}
	r.interp = it
	x0, x1 := xs[0], xs[len(xs)-1]
	r.SweepHz = [2]float64{inc[0].FreqHz, inc[len(inc)-1].FreqHz}

	a := &analysis{o: o, inc: inc, xs: xs, ys: ys, us: us, x0: x0, x1: x1}
	if err := a.checkReference(); err != nil {
		return nil, err
	}
	if floor, declared, _ := a.noiseOf(); !declared {
		a.noiseDB = floor
	}

	// Interpolation estimator.
	ie := a.estimate(it, xs, false)
	r.Estimators.Interpolation = ie.Estimate

	// Slopes beyond the interpolated corners, and at the sweep's ends.
	r.SlopeLow = a.slopeBeyond(ie.Estimate.LowHz, true)
	r.SlopeHigh = a.slopeBeyond(ie.Estimate.HighHz, false)
	endLow, endHigh := a.endSlope(true), a.endSlope(false)

	// Model estimator.
	chosen := ie
	r.CornerSource = "interpolation"
	var model *Model
	if !o.NoModel {
		mr := a.fit(ie.Estimate, r.SlopeLow, r.SlopeHigh, endLow, endHigh)
		if mr != nil {
			r.Model = mr
			model = &mr.Model
			if mr.Accepted && !mr.NoiseDeclared {
				// The adequate model's residual with its degrees of
				// freedom is the better estimate of undeclared noise.
				a.noiseDB = mr.NoiseFitDB
			}
			grid := denseGrid(xs, 0.005)
			me := a.estimate(model, grid, true)
			r.Estimators.Model = &me.Estimate
			if mr.Accepted {
				chosen = me
				r.CornerSource = "model"
			}
		}
	}
	var c curve = it
	if r.CornerSource == "model" {
		c = model
	}
	r.chosen = c
	r.ReferenceGainDB = chosen.Estimate.ReferenceGainDB
	r.ReferenceUDB = chosen.refU
	r.ReferenceHz = math.Pow(10, chosen.xRef)
	if o.RefMode == RefBand {
		r.ReferenceBandHz = []float64{o.BandLoHz, o.BandHiHz}
	}
	r.ThresholdDB = r.ReferenceGainDB + o.LevelDB
	r.LowHz, r.HighHz = chosen.Estimate.LowHz, chosen.Estimate.HighHz
	r.LowUHz, r.HighUHz = chosen.Estimate.LowUHz, chosen.Estimate.HighUHz
	r.Crossings = chosen.Estimate.Crossings
	if r.LowHz == nil {
		r.LowBeyondHz = ptr(r.SweepHz[0])
		if model != nil && r.CornerSource == "model" {
			lo, _ := model.Order()
			r.DCCoupled = lo == 0
		} else {
			r.DCCoupled = endLow != nil && math.Abs(endLow.DBPerDecade) <= 1
		}
	}
	if r.HighHz == nil {
		r.HighBeyondHz = ptr(r.SweepHz[1])
	}
	r.noteUnderRange()
	if r.CornerSource == "model" {
		// Slopes are measured on the data, beyond the reported corners.
		r.SlopeLow = a.slopeBeyond(r.LowHz, true)
		r.SlopeHigh = a.slopeBeyond(r.HighHz, false)
	}
	if r.SlopeLow != nil {
		r.SlopeDBPerDecadeLow = ptr(r.SlopeLow.DBPerDecade)
	}
	if r.SlopeHigh != nil {
		r.SlopeDBPerDecadeHigh = ptr(r.SlopeHigh.DBPerDecade)
	}

	switch {
	case r.LowHz != nil && r.HighHz != nil:
		r.BandwidthHz = ptr(*r.HighHz - *r.LowHz)
		r.CentreHz = ptr(math.Sqrt(*r.HighHz * *r.LowHz))
	case r.LowHz == nil && r.HighHz != nil && r.DCCoupled:
		r.BandwidthHz = ptr(*r.HighHz)
	}

	// Peaking and flatness on the chosen curve.
	grid := xs
	refine := false
	if r.CornerSource == "model" {
		grid, refine = denseGrid(xs, 0.005), true
	}
	xp, vp := maxOn(c, grid, refine)
	r.PeakingDB, r.PeakingHz = vp-r.ReferenceGainDB, math.Pow(10, xp)
	fa, fb := x0, x1
	if r.LowHz != nil {
		fa = log10(*r.LowHz)
	}
	if r.HighHz != nil {
		fb = log10(*r.HighHz)
	}
	if fb > fa {
		lo, hi := math.Inf(1), math.Inf(-1)
		g := []float64{fa}
		for _, x := range grid {
			if x > fa && x < fb {
				g = append(g, x)
			}
		}
		g = append(g, fb)
		for _, x := range denseGrid(g, 0.01) {
			v := c.atLog(x)
			lo, hi = math.Min(lo, v), math.Max(hi, v)
		}
		r.FlatnessDB = ptr(hi - lo)
		r.FlatnessSpanHz = []float64{math.Pow(10, fa), math.Pow(10, fb)}
	}

	a.budget(r, pts, c, chosen.refXs(a))
	r.Drift = a.drift(checks, pts, it)
	if o.MonteCarloCheck > 0 {
		if err := r.checkByMonteCarlo(o.MonteCarloCheck); err != nil && !errors.Is(err, ErrNoBudget) {
			return nil, err
		}
	}
	r.Agreement = agreement(r.Estimators, r.LowUHz, r.HighUHz)

	if o.Mask != nil {
		r.Mask = o.Mask.Check(samples, r.ReferenceGainDB)
		r.mask = o.Mask
	}
	return r, nil
}

// analysis carries the included response through the steps of Analyze.
type analysis struct {
	o          Options
	inc        []Sample
	xs, ys, us []float64 // log10 f, dB, standard uncertainty dB
	x0, x1     float64
	noiseDB    float64     // noise estimated from the data when undeclared
	cov        *covariance // of the accepted model's parameters
}

func (a *analysis) checkReference() error {
	const tol = 1e-9
	lo, hi := math.Pow(10, a.x0), math.Pow(10, a.x1)
	switch a.o.RefMode {
	case RefFrequency:
		x := log10(a.o.RefHz)
		if x < a.x0-tol || x > a.x1+tol {
			return fmt.Errorf("%w: reference frequency %v Hz is outside the swept range %v..%v Hz: choose a reference frequency within it, or the passband maximum", ErrOptions, a.o.RefHz, lo, hi)
		}
	case RefBand:
		if log10(a.o.BandLoHz) < a.x0-tol || log10(a.o.BandHiHz) > a.x1+tol {
			return fmt.Errorf("%w: reference band %v..%v Hz is not within the swept range %v..%v Hz", ErrOptions, a.o.BandLoHz, a.o.BandHiHz, lo, hi)
		}
	}
	return nil
}

// estimation is an Estimate plus what Analyze needs from it.
type estimation struct {
	Estimate
	xRef, refU float64
}

// estimate takes the reference level and corners on curve c, whose
// crossings are searched on grid. model says whether c is a fitted model
// (its own slope is then used for the uncertainty).
func (a *analysis) estimate(c curve, grid []float64, model bool) estimation {
	var e estimation
	switch a.o.RefMode {
	case RefFrequency:
		e.xRef = clamp(log10(a.o.RefHz), a.x0, a.x1)
		e.ReferenceGainDB = c.atLog(e.xRef)
		e.refU = linearAt(a.xs, a.us, e.xRef)
	case RefMax:
		e.xRef, e.ReferenceGainDB = maxOn(c, grid, model)
		e.refU = linearAt(a.xs, a.us, e.xRef)
	case RefBand:
		xa, xb := clamp(log10(a.o.BandLoHz), a.x0, a.x1), clamp(log10(a.o.BandHiHz), a.x0, a.x1)
		e.xRef = (xa + xb) / 2
		e.ReferenceGainDB = meanOn(c, xa, xb)
		// Type B parts are correlated across the band: no √n reduction.
		var su float64
		n := 0
		for i, x := range a.xs {
			if x >= xa && x <= xb {
				su += a.us[i]
				n++
			}
		}
		if n > 0 {
			e.refU = su / float64(n)
		} else {
			e.refU = linearAt(a.xs, a.us, e.xRef)
		}
	}
	level := e.ReferenceGainDB + a.o.LevelDB
	xc := crossings(c, grid, level)
	if !model {
		xc = a.supported(xc, level)
	}
	e.Crossings = []Crossing{}
	var lowX, highX *float64
	for _, x := range xc {
		rising := c.atLog(math.Min(x+1e-7, a.x1)) > c.atLog(math.Max(x-1e-7, a.x0))
		e.Crossings = append(e.Crossings, Crossing{FreqHz: math.Pow(10, x), Rising: rising})
		if x < e.xRef {
			v := x
			lowX = &v
		} else if x > e.xRef && highX == nil {
			v := x
			highX = &v
		}
	}
	refXs := []float64{e.xRef}
	if a.o.RefMode == RefBand {
		xa, xb := clamp(log10(a.o.BandLoHz), a.x0, a.x1), clamp(log10(a.o.BandHiHz), a.x0, a.x1)
		refXs = refXs[:0]
		for i := 0; i <= 16; i++ {
			refXs = append(refXs, xa+(xb-xa)*float64(i)/16)
		}
	}
	corner := func(x float64) (hz, uHz *float64) {
		f := math.Pow(10, x)
		var slope float64
		if model {
			slope = c.slopeLog(x)
		} else {
			slope = a.localSlope(x)
		}
		perLn := math.Abs(slope) / math.Ln10 // dB per neper of frequency
		uc := linearAt(a.xs, a.us, x)
		var uRel float64 // standard uncertainty of ln fc
		if m, ok := c.(*Model); model && ok && a.cov != nil {
			// The fit's averaging: the covariance propagated to the
			// corner, plus the points' Type B parts (not averaged).
			ua := linearAt(a.xs, a.uas(), x)
			ub := math.Sqrt(math.Max(uc*uc-ua*ua, 0) + math.Max(e.refU*e.refU-ua*ua, 0))
			uRel = math.Hypot(a.cov.cornerU(m, x, refXs), ub/perLn)
		} else {
			udb := math.Hypot(math.Hypot(uc, a.noiseDB), math.Hypot(e.refU, a.noiseDB))
			uRel = udb / perLn
			if !model {
				uRel = math.Hypot(uRel, methodU(a.xs, a.ys, x, level))
			}
		}
		var u *float64
		if perLn > 0 && !math.IsNaN(uRel) {
			u = ptr(CoverageFactor * uRel * f)
		}
		return ptr(f), u
	}
	if lowX != nil {
		e.LowHz, e.LowUHz = corner(*lowX)
	}
	if highX != nil {
		e.HighHz, e.HighUHz = corner(*highX)
	}
	return e
}

// supported drops the pairs of consecutive crossings of the interpolant
// that the data do not support (a model's crossings are as good as the
// model, which passed its residual test): an excursion through the level (a dip below it or a bump above
// it) is kept only when some point between the two crossings lies beyond
// the level by more than CoverageFactor standard deviations of its noise.
// One noisy sample dipping through the level, or a narrow feature of a
// model between two samples, makes no corner.
func (a *analysis) supported(xc []float64, level float64) []float64 {
	if len(xc) < 2 {
		return xc
	}
	out := make([]float64, 0, len(xc))
	for i := 0; i < len(xc); i++ {
		if i+1 < len(xc) && !a.beyondLevel(xc[i], xc[i+1], level) {
			i++ // drop the pair
			continue
		}
		out = append(out, xc[i])
	}
	return out
}

// beyondLevel says whether a point strictly between xa and xb lies beyond
// level by more than CoverageFactor times its noise.
func (a *analysis) beyondLevel(xa, xb, level float64) bool {
	for i, x := range a.xs {
		if x <= xa || x >= xb {
			continue
		}
		u := math.Hypot(a.inc[i].UADB, a.noiseDB)
		if math.Abs(a.ys[i]-level) > CoverageFactor*u {
			return true
		}
	}
	return false
}

// uas returns the points' Type A uncertainties, dB.
func (a *analysis) uas() []float64 {
	out := make([]float64, len(a.inc))
	for i, s := range a.inc {
		out[i] = s.UADB
	}
	return out
}

// localSlope is the least-squares slope (dB/decade) of the included points
// within ±0.1 decade of x, widened until it holds at least three points.
func (a *analysis) localSlope(x float64) float64 {
	for w := 0.1; ; w *= 1.5 {
		var sel []int
		for i, xi := range a.xs {
			if math.Abs(xi-x) <= w {
				sel = append(sel, i)
			}
		}
		if len(sel) >= 3 || w > a.x1-a.x0 {
			if s, ok := lsSlope(a.xs, a.ys, sel); ok {
				return s
			}
			return 0
		}
	}
}

func lsSlope(xs, ys []float64, sel []int) (float64, bool) {
	if len(sel) < 2 {
		return 0, false
	}
	var mx, my float64
	for _, i := range sel {
		mx += xs[i]
		my += ys[i]
	}
	n := float64(len(sel))
	mx /= n
	my /= n
	var sxy, sxx float64
	for _, i := range sel {
		sxy += (xs[i] - mx) * (ys[i] - my)
		sxx += (xs[i] - mx) * (xs[i] - mx)
	}
	if sxx == 0 {
		return 0, false
	}
	return sxy / sxx, true
}

func makeSlope(xs []float64, sel []int, s float64, method string) *Slope {
	order := int(math.Round(math.Abs(s) / 20))
	return &Slope{DBPerDecade: s, DBPerOctave: s * math.Log10(2), Order: order,
		SpanHz: [2]float64{math.Pow(10, xs[sel[0]]), math.Pow(10, xs[sel[len(sel)-1]])}, Points: len(sel), Method: method}
}

// slopeBeyond measures the roll-off beyond a corner: the least-squares
// slope of the points from one octave to one decade and an octave beyond
// the corner (2·fc…20·fc above, fc/20…fc/2 below), which skips the knee.
// With fewer than three points there, every point beyond the corner is
// used (at least two). Nil without a corner or points.
func (a *analysis) slopeBeyond(cornerHz *float64, low bool) *Slope {
	if cornerHz == nil {
		return nil
	}
	xc := log10(*cornerHz)
	pick := func(near, far float64) []int {
		var sel []int
		for i, x := range a.xs {
			d := x - xc
			if low {
				d = -d
			}
			if d >= near && d <= far {
				sel = append(sel, i)
			}
		}
		return sel
	}
	sel := pick(math.Log10(2), math.Log10(20))
	method := "least squares over one decade starting an octave beyond the corner"
	if len(sel) < 3 {
		sel = pick(1e-9, math.Inf(1))
		method = "least squares over all points beyond the corner (less than a decade available)"
	}
	s, ok := lsSlope(a.xs, a.ys, sel)
	if !ok {
		return nil
	}
	return makeSlope(a.xs, sel, s, method)
}

// endSlope is the slope over the first (or last) half decade of the sweep,
// at least three points; nil with fewer than three points in the sweep.
func (a *analysis) endSlope(low bool) *Slope {
	n := len(a.xs)
	edge := a.xs[0]
	if !low {
		edge = a.xs[n-1]
	}
	var sel []int
	for k := 0; k < n; k++ {
		i := k
		if !low {
			i = n - 1 - k
		}
		if k >= 3 && math.Abs(a.xs[i]-edge) > 0.5 {
			break
		}
		sel = append(sel, i)
	}
	sort.Ints(sel)
	s, ok := lsSlope(a.xs, a.ys, sel)
	if !ok || len(sel) < 3 {
		return nil
	}
	return makeSlope(a.xs, sel, s, "least squares over the first or last half decade of the sweep")
}

// ordersAround returns the orders to try for a side with an implied order
// (up to MaxSideOrder).
func ordersAround(s *Slope) []int {
	if s == nil || s.Points < 3 {
		return []int{1, 2, 3, 4}
	}
	n := max(1, min(MaxSideOrder, s.Order))
	var out []int
	for o := n - 1; o <= n+1; o++ {
		if o >= 1 && o <= MaxSideOrder {
			out = append(out, o)
		}
	}
	return out
}
