package analysis

import (
	"fmt"
	"math"
	"sort"
	"strings"
)

// ModelTest documents the rule deciding whether the fitted model's corners
// are reported.
//
// The fit sees each point with a standard deviation s: its Type A
// uncertainty u_A in dB when the data declare one (never below half the
// median declared u_A, so that one tiny figure cannot dominate), and
// otherwise the noise estimated from the data by a difference-based
// estimator (diffNoiseDB); for binned long responses s/√m. The model with
// the lowest BIC = n·ln(χ²/n) + k·ln n (χ² = Σ(r/s)², k = number of
// parameters, the gain included) is tested. It is accepted, and its corners
// reported, when both hold:
//
//  1. the residual is at the noise level: √(χ²/n) ≤ Options.ModelFactor
//     (2 by default);
//  2. the residual has no structure: the lag-1 autocorrelation of r/s in
//     frequency order is at most max(0.5, 3/√n) — skipped when the rms
//     residual is below Options.NoiseFloorDB (the resolution below which
//     structure does not matter) or √(χ²/n) ≤ 1.
//
// Otherwise the corners come from interpolation. The fit needs at least
// k + 3 points per candidate; cascades of up to MaxSideOrder poles per side
// are tried, the orders guided by the measured slopes (implied order ± 1),
// then extended by zero pairs and shelves where the data or the residual
// suggest them (see augment).
const ModelTest = "reduced chi <= factor and lag-1 autocorrelation <= max(0.5, 3/sqrt(n))"

// searchPoints is the number of bins the model search works on; the best
// candidates are then refined on all the fit points.
const searchPoints = 100

// noiseOf returns the standard deviation the fit assumes for a point
// without its own (see ModelTest), and whether the data declare theirs.
func (a *analysis) noiseOf() (floorDB float64, declared bool, diffDB float64) {
	var ua []float64
	for _, s := range a.inc {
		if s.UADB > 0 && !math.IsInf(s.UADB, 0) {
			ua = append(ua, s.UADB)
		}
	}
	diffDB = diffNoiseDB(a.xs, a.ys)
	if len(ua) > 0 {
		sort.Float64s(ua)
		return median(ua) / 2, true, diffDB
	}
	// A numerical floor only: gains written with about nine digits.
	const resolutionDB = 1e-9
	if !(diffDB > resolutionDB) {
		return resolutionDB, false, diffDB
	}
	return diffDB, false, diffDB
}

// search runs the model search on at most searchPoints bins and refines
// the best candidates on d.
func (a *analysis) search(d *fitData, h fitHints, floorDB float64) []fitted {
	coarse := d
	if len(d.y) > searchPoints {
		coarse = newFitData(a.inc, floorDB, searchPoints)
	}
	cands := fitModels(coarse, h)
	bic := func(f fitted) float64 { return bicOf(coarse, f) }
	cands = augment(coarse, cands, h, a.o.ModelFactor, bic)
	if len(cands) > 0 && (cands[0].st.hasZeros() || !residualStats(coarse, &cands[0].model).ok(coarse, a.o.ModelFactor)) {
		// The slopes may understate the order (a roll-off cut short by
		// the sweep's end), and zero pairs may stand in for missing poles:
		// try steeper all-pole sides too.
		h2 := h
		h2.lowOrders, h2.highOrders = steeper(h.lowOrders), steeper(h.highOrders)
		cands = append(cands, fitModels(coarse, h2)...)
		sort.SliceStable(cands, func(i, j int) bool { return cands[i].bic < cands[j].bic })
	}
	if coarse == d {
		return cands
	}
	var out []fitted
	for _, c := range cands[:min(3, len(cands))] {
		if f, ok := fitOne(d, c.st, [][]float64{thetaOfModel(c)}); ok {
			f.bic = bicOf(d, f)
			out = append(out, f)
		}
	}
	sort.SliceStable(out, func(i, j int) bool { return out[i].bic < out[j].bic })
	return out
}

// fit runs the model fit with starts seeded from the interpolated corners
// and slopes, and applies the residual test (see ModelTest).
func (a *analysis) fit(ie Estimate, slopeLow, slopeHigh, endLow, endHigh *Slope) *ModelResult {
	floorDB, declared, diffDB := a.noiseOf()
	if sp := a.o.Spec; sp != nil && sp.SettleTolRel > 0 {
		// What settling leaves of each reading is bounded by the
		// tolerance the readings were accepted at, independently from
		// point to point: a rectangular distribution of that half-width
		// (JCGM 100:2008 §4.3.7), part of every point's scatter about the
		// response the model describes.
		settleDB := 20 * math.Log10(1+sp.SettleTolRel) / math.Sqrt(3)
		floorDB = math.Hypot(floorDB, settleDB)
	}
	d := newFitData(a.inc, floorDB, a.o.MaxFitPoints)
	h := fitHints{lowHz: a.inc[0].FreqHz, highHz: a.inc[len(a.inc)-1].FreqHz}
	side := func(corner *float64, beyond, end *Slope, falling bool) (orders []int, hint float64, ok bool) {
		if corner != nil {
			// Order 0 too: a crossing may be ripple rather than a roll-off.
			return append([]int{0}, ordersAround(beyond)...), *corner, true
		}
		// No corner: look for a roll-off starting toward the sweep's end.
		if end != nil && ((falling && end.DBPerDecade < -1) || (!falling && end.DBPerDecade > 1)) {
			return append([]int{0}, ordersAround(end)...), 0, true
		}
		return []int{0}, 0, false
	}
	var ok bool
	var hint float64
	if h.lowOrders, hint, ok = side(ie.LowHz, slopeLow, endLow, false); ok && hint > 0 {
		h.lowHz = hint
	}
	if h.highOrders, hint, ok = side(ie.HighHz, slopeHigh, endHigh, true); ok && hint > 0 {
		h.highHz = hint
	}
	cands := a.search(d, h, floorDB)
	if len(cands) == 0 {
		return nil
	}
	best := cands[0]
	mr := &ModelResult{Model: best.model, Description: best.model.Describe(), BIC: best.bic, FitPoints: len(d.y),
		Sections: describeSections(best.model), NoiseDeclared: declared, NoiseDiffDB: nanToZero(diffDB)}
	n := float64(len(d.y))
	st := residualStats(d, &best.model)
	var ss2 float64
	for i := range d.y {
		ss2 += d.s[i] * d.s[i]
	}
	mr.ResidualRMSDB, mr.ReducedChi, mr.Lag1 = st.rmsDB, st.redChi, st.lag1
	mr.NoiseDB = math.Sqrt(ss2 / n)
	if dof := n - float64(best.st.nParams()+1); dof > 0 {
		mr.NoiseFitDB = st.rmsDB * math.Sqrt(n/dof)
	}
	lagMax := math.Max(0.5, 3/math.Sqrt(n))
	switch {
	case mr.ReducedChi > a.o.ModelFactor:
		mr.Reason = fmt.Sprintf("residual %.3g dB rms is above the noise level: reduced chi %.3g > %g", mr.ResidualRMSDB, mr.ReducedChi, a.o.ModelFactor)
	case mr.ResidualRMSDB > a.o.NoiseFloorDB && mr.ReducedChi > 1 && mr.Lag1 > lagMax:
		mr.Reason = fmt.Sprintf("residual %.3g dB rms shows structure: lag-1 autocorrelation %.2f > %.2f", mr.ResidualRMSDB, mr.Lag1, lagMax)
	default:
		mr.Accepted = true
		mr.Reason = fmt.Sprintf("residual %.3g dB rms at the noise level (%.3g dB): reduced chi %.3g <= %g, lag-1 autocorrelation %.2f", mr.ResidualRMSDB, mr.NoiseDB, mr.ReducedChi, a.o.ModelFactor, mr.Lag1)
	}
	for _, c := range cands {
		var sr float64
		for i := range d.y {
			r := d.y[i] - c.model.atLog(d.xs[i])
			sr += r * r
		}
		mr.Candidates = append(mr.Candidates, Candidate{Structure: c.st.String(), BIC: c.bic, ResidualRMSDB: math.Sqrt(sr / n)})
	}
	a.cov = newCovariance(d, best, declared)
	return mr
}

// steeper returns the orders two to four above the highest of orders (none
// when that is 0), up to MaxSideOrder.
func steeper(orders []int) []int {
	top := 0
	for _, o := range orders {
		top = max(top, o)
	}
	if top == 0 {
		return []int{0}
	}
	var out []int
	for o := top + 2; o <= min(top+4, MaxSideOrder); o += 2 {
		out = append(out, o)
	}
	if len(out) == 0 {
		return []int{top}
	}
	return out
}

func nanToZero(v float64) float64 {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return 0
	}
	return v
}

func (st structure) hasZeros() bool {
	for _, k := range st {
		if k == ZeroPairJ {
			return true
		}
	}
	return false
}

func (st structure) String() string {
	if len(st) == 0 {
		return "flat"
	}
	parts := make([]string, len(st))
	for i, k := range st {
		parts[i] = string(k)
	}
	return strings.Join(parts, "+")
}

// agreement compares the two estimators' corners.
func agreement(e Estimators, lowU, highU *float64) Agreement {
	var ag Agreement
	if e.Model == nil {
		ag.Note = "no model fitted"
		return ag
	}
	ag.Comparable = (e.Interpolation.LowHz == nil) == (e.Model.LowHz == nil) && (e.Interpolation.HighHz == nil) == (e.Model.HighHz == nil)
	ag.WithinU = ag.Comparable
	cmp := func(i, m, u *float64) *float64 {
		if i == nil || m == nil {
			return nil
		}
		rel := (*m - *i) / *i
		if u == nil || math.Abs(*m-*i) > *u {
			ag.WithinU = false
		}
		return &rel
	}
	ag.LowRel = cmp(e.Interpolation.LowHz, e.Model.LowHz, lowU)
	ag.HighRel = cmp(e.Interpolation.HighHz, e.Model.HighHz, highU)
	switch {
	case !ag.Comparable:
		ag.Note = "the estimators disagree on which corners exist in the sweep"
	case ag.WithinU:
		ag.Note = "the estimators agree within the expanded uncertainty"
	default:
		ag.Note = "the estimators differ by more than the expanded uncertainty"
	}
	return ag
}
