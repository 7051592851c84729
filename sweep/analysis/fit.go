package analysis

import (
	"math"
	"sort"

	"gonum.org/v1/gonum/mat"
)

// fitData is what the model fit sees: x = ln f, y in dB, s the standard
// deviation assumed for y (dB, never below the noise floor).
type fitData struct {
	lf, y, s, w []float64
	f2          []float64 // f², for u² = f²/f0²
	xs          []float64 // log10 f, for the structure test and crossings
	loHz, hiHz  float64
}

// newFitData bins the included samples into at most maxPoints bins equally
// spaced in log frequency (one sample per bin when there are fewer samples
// than bins). A bin's y is the mean gain of its samples and its s the rms
// of their Type A uncertainties (raised to floorDB, the noise assumed for a
// point without its own; see ModelTest) divided by √m.
func newFitData(s []Sample, floorDB float64, maxPoints int) *fitData {
	d := &fitData{loHz: s[0].FreqHz, hiHz: s[len(s)-1].FreqHz}
	add := func(x, y, ua2 float64, m int) {
		sd := math.Max(math.Sqrt(ua2), floorDB) / math.Sqrt(float64(m))
		d.xs = append(d.xs, x)
		d.lf = append(d.lf, x*math.Ln10)
		d.f2 = append(d.f2, math.Exp(2*x*math.Ln10))
		d.y = append(d.y, y)
		d.s = append(d.s, sd)
		d.w = append(d.w, 1/(sd*sd))
	}
	if len(s) <= maxPoints {
		for _, t := range s {
			add(math.Log10(t.FreqHz), t.GainDB, t.UADB*t.UADB, 1)
		}
		return d
	}
	x0, x1 := math.Log10(d.loHz), math.Log10(d.hiHz)
	width := (x1 - x0) / float64(maxPoints)
	for i := 0; i < len(s); {
		bin := int((math.Log10(s[i].FreqHz) - x0) / width)
		var sx, sy, sa float64
		m := 0
		j := i
		for ; j < len(s); j++ {
			x := math.Log10(s[j].FreqHz)
			if b := int((x - x0) / width); b != bin && !(b >= maxPoints && bin == maxPoints-1) {
				break
			}
			sx += x
			sy += s[j].GainDB
			sa += s[j].UADB * s[j].UADB
			m++
		}
		add(sx/float64(m), sy/float64(m), sa/float64(m), m)
		i = j
	}
	return d
}

// structure is a cascade of section kinds.
type structure []SectionKind

func (st structure) nParams() int {
	n := 0
	for _, k := range st {
		n += k.nParams()
	}
	return n
}

// evaluator computes the weighted residuals of a structure with the gain
// eliminated (variable projection: for given shape parameters the best gain
// is the weighted mean of y − shape).
type evaluator struct {
	d      *fitData
	st     structure
	np     int
	shape  []float64
	dshape []float64 // n×np row-major
	r      []float64
	jac    []float64 // n×np
	gain   float64
	last   []float64
	lo, hi []float64 // bounds of the parameters, nil for none
}

func newEvaluator(d *fitData, st structure) *evaluator {
	n := len(d.y)
	np := st.nParams()
	return &evaluator{d: d, st: st, np: np, shape: make([]float64, n), dshape: make([]float64, n*np),
		r: make([]float64, n), jac: make([]float64, n*np)}
}

// boundQ keeps every Q the fit steps to just inside the range where a
// model is valid (see model).
func (e *evaluator) boundQ() {
	e.lo, e.hi = make([]float64, e.np), make([]float64, e.np)
	j := 0
	for _, k := range e.st {
		e.lo[j], e.hi[j] = math.Inf(-1), math.Inf(1)
		if k.nParams() == 2 {
			e.lo[j+1], e.hi[j+1] = math.Log(0.0501), math.Log(199.9)
		}
		j += k.nParams()
	}
}

func (e *evaluator) eval(theta []float64) {
	if e.last != nil && equalVec(e.last, theta) {
		return
	}
	e.last = append(e.last[:0], theta...)
	n, np := len(e.d.y), e.np
	for i := range e.shape {
		e.shape[i] = 0
	}
	for i := range e.dshape {
		e.dshape[i] = 0
	}
	j := 0
	for _, k := range e.st {
		p := theta[j]
		q := 0.0
		if k.nParams() == 2 {
			q = theta[j+1]
		}
		inv2 := math.Exp(-2 * p)
		iq2 := math.Exp(-2 * q)
		for i := 0; i < n; i++ {
			g, dp, dq := sectionDBu(k, e.d.lf[i]-p, e.d.f2[i]*inv2, iq2)
			e.shape[i] += g
			e.dshape[i*np+j] = dp
			if k.nParams() == 2 {
				e.dshape[i*np+j+1] = dq
			}
		}
		j += k.nParams()
	}
	var sw, swr float64
	mean := make([]float64, np)
	for i := 0; i < n; i++ {
		w := e.d.w[i]
		sw += w
		swr += w * (e.d.y[i] - e.shape[i])
		for c := 0; c < np; c++ {
			mean[c] += w * e.dshape[i*np+c]
		}
	}
	e.gain = swr / sw
	for c := range mean {
		mean[c] /= sw
	}
	for i := 0; i < n; i++ {
		e.r[i] = e.d.y[i] - e.gain - e.shape[i]
		for c := 0; c < np; c++ {
			e.jac[i*np+c] = -(e.dshape[i*np+c] - mean[c])
		}
	}
}

func (e *evaluator) chi2(theta []float64) float64 {
	e.eval(theta)
	var f float64
	for i, r := range e.r {
		f += e.d.w[i] * r * r
	}
	if math.IsNaN(f) {
		return math.Inf(1)
	}
	return f
}

// lm minimises χ² from x0 by Levenberg–Marquardt (K. Levenberg 1944,
// D. W. Marquardt 1963) with Marquardt's diagonal scaling: each step
// solves (JᵀWJ + λ·diag(JᵀWJ))·δ = −JᵀWr by Cholesky factorisation.
func (e *evaluator) lm(x0 []float64) (x []float64, chi2 float64) {
	np := e.np
	x = append([]float64(nil), x0...)
	chi2 = e.chi2(x)
	if np == 0 || math.IsInf(chi2, 0) {
		return x, chi2
	}
	a := mat.NewSymDense(np, nil)
	g := mat.NewVecDense(np, nil)
	delta := mat.NewVecDense(np, nil)
	var chol mat.Cholesky
	trial := make([]float64, np)
	lambda := 1e-3
	small := 0
	for iter := 0; iter < 200 && small < 2; iter++ {
		e.eval(x)
		for c := 0; c < np; c++ {
			var s float64
			for i, r := range e.r {
				s += e.d.w[i] * e.jac[i*np+c] * r
			}
			g.SetVec(c, -s)
			for b := c; b < np; b++ {
				var t float64
				for i := range e.r {
					t += e.d.w[i] * e.jac[i*np+c] * e.jac[i*np+b]
				}
				a.SetSym(c, b, t)
			}
		}
		improved := false
		for lambda < 1e8 {
			m := mat.NewSymDense(np, nil)
			m.CopySym(a)
			for c := 0; c < np; c++ {
				m.SetSym(c, c, a.At(c, c)*(1+lambda)+1e-12)
			}
			if !chol.Factorize(m) {
				lambda *= 10
				continue
			}
			if err := chol.SolveVecTo(delta, g); err != nil {
				lambda *= 10
				continue
			}
			for c := range trial {
				d := delta.AtVec(c)
				// Keep a step within a decade-and-a-half in f0 or Q.
				trial[c] = x[c] + math.Max(-3.5, math.Min(3.5, d))
				if e.lo != nil {
					trial[c] = clamp(trial[c], e.lo[c], e.hi[c])
				}
			}
			f := e.chi2(trial)
			if f < chi2 {
				if chi2-f <= 1e-12*chi2+1e-24 {
					small++
				} else {
					small = 0
				}
				copy(x, trial)
				chi2 = f
				lambda = math.Max(lambda/3, 1e-9)
				improved = true
				break
			}
			lambda *= 4
		}
		if !improved {
			break
		}
	}
	return x, chi2
}

func equalVec(a, b []float64) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

// fitted is one candidate model after the fit.
type fitted struct {
	model Model
	chi2  float64
	bic   float64
	k     int
	st    structure
}

// fitOne minimises χ² for st from each start and returns the best valid
// fit; ok is false when no start gave a valid model.
func fitOne(d *fitData, st structure, starts [][]float64) (best fitted, ok bool) {
	return fitWith(newEvaluator(d, st), d, st, starts)
}

// fitOneQ is fitOne with every Q kept inside the valid range during the
// steps (for cascades with zeros, whose fits otherwise wander off).
func fitOneQ(d *fitData, st structure, starts [][]float64) (best fitted, ok bool) {
	e := newEvaluator(d, st)
	e.boundQ()
	return fitWith(e, d, st, starts)
}

func fitWith(e *evaluator, d *fitData, st structure, starts [][]float64) (best fitted, ok bool) {
	best.chi2 = math.Inf(1)
	for _, x0 := range starts {
		x, f := e.lm(x0)
		if math.IsInf(f, 0) || math.IsNaN(f) || f >= best.chi2 {
			continue
		}
		m, valid := e.model(x, d)
		if !valid {
			continue
		}
		best = fitted{model: m, chi2: f, st: st, k: e.np + 1}
		ok = true
	}
	return best, ok
}

// model builds the Model for theta; valid is false when a section's
// frequency is far outside the sweep or its Q is implausible, i.e. the
// data do not determine it.
func (e *evaluator) model(theta []float64, d *fitData) (Model, bool) {
	e.eval(theta)
	m := Model{GainDB: e.gain}
	j := 0
	for _, k := range e.st {
		s := Section{Kind: k, FHz: math.Exp(theta[j])}
		if s.FHz < d.loHz/30 || s.FHz > d.hiHz*30 || math.IsNaN(s.FHz) {
			return m, false
		}
		if k.nParams() == 2 {
			s.Q = math.Exp(theta[j+1])
			if !(s.Q >= 0.05 && s.Q <= 200) {
				return m, false
			}
		}
		m.Sections = append(m.Sections, s)
		j += k.nParams()
	}
	// Canonical order: high-pass sections first, then by frequency.
	sort.SliceStable(m.Sections, func(a, b int) bool {
		sa, sb := m.Sections[a], m.Sections[b]
		if sa.Kind.highPass() != sb.Kind.highPass() {
			return sa.Kind.highPass()
		}
		return sa.FHz < sb.FHz
	})
	return m, true
}

// sideStarts returns starting parameters (ln f0, ln Q…) for a side of the
// given order around the corner hint fcHz. For the high-pass side the
// frequency multipliers are inverted.
func sideStarts(order int, fcHz float64, hp bool) [][]float64 {
	type sec struct{ m, q float64 }
	var sets [][]sec
	switch order {
	case 1:
		sets = [][]sec{{{1, 0}}}
	case 2:
		sets = [][]sec{{{1, 0.707}}, {{0.8, 2}}, {{1.4, 0.55}}}
	case 3:
		sets = [][]sec{{{1, 1}, {1, 0}}, {{1.2, 0.6}, {1.2, 0}}, {{0.9, 2.5}, {0.6, 0}}}
	case 4:
		// Butterworth-like, Chebyshev-like (low, high Q), Bessel-like.
		sets = [][]sec{{{1, 0.54}, {1, 1.31}}, {{0.6, 0.78}, {1, 3.5}}, {{1.4, 0.52}, {1.6, 0.81}}}
	default:
		return patternStarts(order, fcHz, hp)
	}
	out := make([][]float64, 0, len(sets))
	for _, set := range sets {
		var v []float64
		for _, s := range set {
			m := s.m
			if hp {
				m = 1 / m
			}
			v = append(v, math.Log(fcHz*m))
			if s.q > 0 {
				v = append(v, math.Log(s.q))
			}
		}
		out = append(out, v)
	}
	return out
}

// fitHints says, per side, which orders to try and where the corner is.
type fitHints struct {
	lowOrders, highOrders []int // 0 = no section on that side
	lowHz, highHz         float64
}

// bicOf is the Bayesian information criterion of a fit to d:
// n·ln(χ²/n) + k·ln n. A residual below 1/20 of the assumed noise is
// treated as 1/20 of it, so that extra sections cannot win by fitting
// rounding.
func bicOf(d *fitData, f fitted) float64 {
	const minMeanChi2 = 1.0 / 400
	n := float64(len(d.y))
	k := f.st.nParams() + 1
	return n*math.Log(math.Max(f.chi2/n, minMeanChi2)) + float64(k)*math.Log(n)
}

// fitModels fits every combination of the hinted low-side and high-side
// cascades and returns them sorted by BIC (best first). With one pole on
// each side the second-order band-pass (any Q) is tried as well.
func fitModels(d *fitData, h fitHints) []fitted {
	n := float64(len(d.y))
	var out []fitted
	for _, lo := range h.lowOrders {
		for _, hi := range h.highOrders {
			st := append(sideStructure(lo, true), sideStructure(hi, false)...)
			k := st.nParams() + 1
			if float64(k) >= n-2 {
				continue
			}
			ls := sideStarts(lo, h.lowHz, true)
			hs := sideStarts(hi, h.highHz, false)
			ns := max(len(ls), len(hs), 1)
			starts := make([][]float64, ns)
			for i := range starts {
				var v []float64
				if len(ls) > 0 {
					v = append(v, ls[i%len(ls)]...)
				}
				if len(hs) > 0 {
					v = append(v, hs[i%len(hs)]...)
				}
				starts[i] = v
			}
			if f, ok := fitOne(d, st, starts); ok {
				f.bic = bicOf(d, f)
				out = append(out, f)
			}
			if lo == 1 && hi == 1 && h.lowHz > 0 && h.highHz > h.lowHz {
				f0 := math.Sqrt(h.lowHz * h.highHz)
				q := f0 / (h.highHz - h.lowHz)
				bs := [][]float64{{math.Log(f0), math.Log(q)}, {math.Log(f0), math.Log(math.Max(q, 0.5) * 2)}}
				if f, ok := fitOne(d, structure{BandPass2}, bs); ok {
					f.bic = bicOf(d, f)
					out = append(out, f)
				}
			}
		}
	}
	sort.SliceStable(out, func(a, b int) bool { return out[a].bic < out[b].bic })
	return out
}
