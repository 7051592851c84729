package analysis

import (
	"math"
	"sort"
)

// MaxSideOrder is the highest number of poles the model search puts on
// either side of the passband.
const MaxSideOrder = 10

// sideStructure is the all-pole cascade of the given order for one side:
// order/2 second-order sections and, for an odd order, one first-order.
func sideStructure(order int, hp bool) structure {
	k1, k2 := LowPass1, LowPass2
	if hp {
		k1, k2 = HighPass1, HighPass2
	}
	var st structure
	for i := 0; i < order/2; i++ {
		st = append(st, k2)
	}
	if order%2 == 1 {
		st = append(st, k1)
	}
	return st
}

// poleSet is one start: per second-order section (in order) the frequency
// multiplier and Q, then the first-order section's multiplier.
type poleSet struct {
	m, q []float64
	m1   float64
}

// polePatterns returns start patterns for an all-pole side of order n,
// normalised to a −3 dB corner at 1: Butterworth (Qk = 1/(2·sin((2k−1)π/2n)),
// from the handbook pole positions), Chebyshev type I of 0.5 and 2 dB
// ripple (poles −sinh(a)·sin θk ± j·cosh(a)·cos θk, a = asinh(1/ε)/n, the
// −3 dB corner at cosh(acosh(1/ε)/n) times the ripple edge, handbook
// formulas), and a Bessel-like pattern of low Q and spread frequencies.
func polePatterns(n int) []poleSet {
	var out []poleSet
	bw := poleSet{m1: 1}
	for k := 1; k <= n/2; k++ {
		bw.m = append(bw.m, 1)
		bw.q = append(bw.q, 1/(2*math.Sin(float64(2*k-1)*math.Pi/float64(2*n))))
	}
	out = append(out, bw)
	for _, rippleDB := range []float64{0.5, 2} {
		eps := math.Sqrt(math.Pow(10, rippleDB/10) - 1)
		a := math.Asinh(1/eps) / float64(n)
		f3 := math.Cosh(math.Acosh(1/eps) / float64(n))
		ch := poleSet{m1: math.Sinh(a) / f3}
		for k := 1; k <= n/2; k++ {
			th := float64(2*k-1) * math.Pi / float64(2*n)
			sr, si := math.Sinh(a)*math.Sin(th), math.Cosh(a)*math.Cos(th)
			w := math.Hypot(sr, si)
			ch.m = append(ch.m, w/f3)
			ch.q = append(ch.q, w/(2*sr))
		}
		out = append(out, ch)
	}
	be := poleSet{m1: 1.3}
	for k := 1; k <= n/2; k++ {
		be.m = append(be.m, 1.3+0.15*float64(k))
		be.q = append(be.q, 0.5+0.4*(bw.q[k-1]-0.5))
	}
	return append(out, be)
}

// patternStarts turns the patterns into parameters (ln f0, ln Q…) in the
// order of sideStructure(n, hp) around the corner fcHz.
func patternStarts(n int, fcHz float64, hp bool) [][]float64 {
	var out [][]float64
	for _, p := range polePatterns(n) {
		var v []float64
		mul := func(m float64) float64 {
			if hp {
				return fcHz / m
			}
			return fcHz * m
		}
		for k := range p.m {
			v = append(v, math.Log(mul(p.m[k])), math.Log(p.q[k]))
		}
		if n%2 == 1 {
			v = append(v, math.Log(mul(p.m1)))
		}
		out = append(out, v)
	}
	return out
}

// adequacy is the residual test of one fitted candidate (see ModelTest).
type adequacy struct {
	rmsDB, redChi, lag1 float64
}

func residualStats(d *fitData, m *Model) adequacy {
	n := float64(len(d.y))
	var sr2, chi2, lagNum, lagDen, prevZ float64
	for i := range d.y {
		r := d.y[i] - m.atLog(d.xs[i])
		z := r / d.s[i]
		sr2 += r * r
		chi2 += z * z
		lagDen += z * z
		if i > 0 {
			lagNum += z * prevZ
		}
		prevZ = z
	}
	a := adequacy{rmsDB: math.Sqrt(sr2 / n), redChi: math.Sqrt(chi2 / n)}
	if lagDen > 0 {
		a.lag1 = lagNum / lagDen
	}
	return a
}

func (a adequacy) ok(d *fitData, factor float64) bool {
	n := float64(len(d.y))
	return a.redChi <= factor && (a.lag1 <= math.Max(0.5, 3/math.Sqrt(n)) || a.redChi <= 1)
}

// step is a level change across a slope extremum (a shelf's transition).
type step struct {
	x, dB float64 // centre (log10 f) and the level change across it
}

// dips returns the local minima of ys over xs deeper than three standard
// deviations sd of the points, refined by a parabola through the three
// points (log10 f), deepest first, at most maxN.
func dips(xs, ys, sd []float64, maxN int) []float64 {
	type dip struct{ x, depth float64 }
	var ds []dip
	for i := 1; i+1 < len(ys); i++ {
		if ys[i] < ys[i-1]-3*sd[i] && ys[i] < ys[i+1]-3*sd[i] {
			ds = append(ds, dip{parabolaX(xs[i-1:i+2], ys[i-1:i+2]), math.Min(ys[i-1], ys[i+1]) - ys[i]})
		}
	}
	sort.Slice(ds, func(a, b int) bool { return ds[a].depth > ds[b].depth })
	var out []float64
	for i := 0; i < len(ds) && i < maxN; i++ {
		out = append(out, ds[i].x)
	}
	return out
}

// parabolaX is the abscissa of the vertex of the parabola through three
// points, clamped to their span.
func parabolaX(x, y []float64) float64 {
	d1 := (y[1] - y[0]) / (x[1] - x[0])
	d2 := (y[2] - y[1]) / (x[2] - x[1])
	c := (d2 - d1) / (x[2] - x[0])
	if c == 0 {
		return x[1]
	}
	v := (x[0]+x[1])/2 - d1/(2*c)
	return clamp(v, x[0], x[2])
}

// slopeSteps finds the transitions of a shelf: runs of the point-to-point
// slope of one sign whose level change is at least 1 dB while the slope
// returns toward zero on both sides; the largest three.
func slopeSteps(xs, ys []float64) []step {
	n := len(xs)
	if n < 4 {
		return nil
	}
	sl := make([]float64, n-1)
	for i := range sl {
		sl[i] = (ys[i+1] - ys[i]) / (xs[i+1] - xs[i])
	}
	var out []step
	for i := 1; i+1 < len(sl); i++ {
		a := math.Abs(sl[i])
		if a < 3 || a < math.Abs(sl[i-1]) || a < math.Abs(sl[i+1]) {
			continue
		}
		// Walk out while the slope keeps its sign and falls.
		lo, hi := i, i
		for lo > 0 && sl[lo-1]*sl[i] > 0 && math.Abs(sl[lo-1]) <= math.Abs(sl[lo]) {
			lo--
		}
		for hi+1 < len(sl) && sl[hi+1]*sl[i] > 0 && math.Abs(sl[hi+1]) <= math.Abs(sl[hi]) {
			hi++
		}
		dB := ys[hi+1] - ys[lo]
		if math.Abs(dB) >= 1 {
			out = append(out, step{x: (xs[i] + xs[i+1]) / 2, dB: dB})
		}
	}
	sort.Slice(out, func(a, b int) bool { return math.Abs(out[a].dB) > math.Abs(out[b].dB) })
	if len(out) > 3 {
		out = out[:3]
	}
	return out
}

// thetaOfModel returns the parameters of a fitted candidate in the order
// of its structure (the fit keeps the model's sections in canonical order,
// so they are matched by kind).
func thetaOfModel(f fitted) []float64 {
	used := make([]bool, len(f.model.Sections))
	var th []float64
	for _, k := range f.st {
		for i, s := range f.model.Sections {
			if !used[i] && s.Kind == k {
				used[i] = true
				th = append(th, math.Log(s.FHz))
				if k.nParams() == 2 {
					th = append(th, math.Log(s.Q))
				}
				break
			}
		}
	}
	return th
}

// augment extends the best candidates by the sections the data suggest
// and the residual shows: a zero pair at each dip (with and without a new
// pole pair there, a notch), a shelf (LP1 and Z1) across each level step,
// and, with several dips on one side, a stop band of zeros with an all-pole
// side of twice as many poles. Rounds repeat while the BIC improves and the
// best is not adequate.
func augment(d *fitData, cands []fitted, h fitHints, factor float64, bic func(fitted) float64) []fitted {
	xs := d.xs
	dataDips := dips(xs, d.y, d.s, 4)
	steps := slopeSteps(xs, d.y)
	lx := func(x float64) float64 { return x * math.Ln10 }
	for round := 0; round < 3 && len(cands) > 0; round++ {
		best := cands[0]
		if residualStats(d, &best.model).ok(d, factor) {
			break
		}
		res := make([]float64, len(xs))
		for i := range xs {
			res[i] = d.y[i] - best.model.atLog(xs[i])
		}
		dipX := append(append([]float64{}, dataDips...), dips(xs, res, d.s, 2)...)
		var trials []fitted
		bases := cands[:min(2, len(cands))]
		for _, b := range bases {
			th := thetaOfModel(b)
			try := func(add structure, starts ...[]float64) {
				st := append(append(structure{}, b.st...), add...)
				if st.nParams()+4 >= len(d.y) {
					return
				}
				var ss [][]float64
				for _, s := range starts {
					ss = append(ss, append(append([]float64{}, th...), s...))
				}
				if f, ok := fitOneQ(d, st, ss); ok {
					f.bic = bic(f)
					trials = append(trials, f)
				}
			}
			for _, x := range dipX {
				try(structure{ZeroPairJ}, []float64{lx(x)})
				try(structure{LowPass2, ZeroPairJ},
					[]float64{lx(x), math.Log(2), lx(x)}, []float64{lx(x), math.Log(8), lx(x)}, []float64{lx(x), math.Log(30), lx(x)})
			}
			for _, s := range steps {
				r := math.Pow(10, math.Abs(s.dB)/40)
				fp, fz := lx(s.x)-math.Log(r), lx(s.x)+math.Log(r)
				if s.dB > 0 {
					fp, fz = fz, fp
				}
				try(structure{LowPass1, Zero1}, []float64{fp, fz}, []float64{lx(s.x) - 0.3, lx(s.x) + 0.3})
			}
		}
		trials = append(trials, stopBands(d, dataDips, h, bic)...)
		if len(trials) == 0 {
			break
		}
		sort.SliceStable(trials, func(a, b int) bool { return trials[a].bic < trials[b].bic })
		if trials[0].bic >= cands[0].bic {
			break
		}
		cands = append(trials[:1:1], cands...)
		sort.SliceStable(cands, func(a, b int) bool { return cands[a].bic < cands[b].bic })
	}
	return cands
}

// stopBands tries, for the dips above the high corner (below the low
// corner), an all-pole side of 2m and 2m+1 poles with m zero pairs at the
// dips: the stop band of an inverse-Chebyshev or elliptic filter.
func stopBands(d *fitData, dipsX []float64, h fitHints, bic func(fitted) float64) []fitted {
	var out []fitted
	for _, hp := range []bool{false, true} {
		fc := h.highHz
		if hp {
			fc = h.lowHz
		}
		if !(fc > 0) {
			continue
		}
		var zs []float64
		for _, x := range dipsX {
			if (!hp && x > math.Log10(fc)) || (hp && x < math.Log10(fc)) {
				zs = append(zs, x*math.Ln10)
			}
		}
		if len(zs) == 0 {
			continue
		}
		// The zero nearest the passband often makes no dip of its own
		// (the response is still falling there): try one more, midway
		// (in log f) between the corner and the nearest dip.
		near := zs[0]
		for _, z := range zs {
			if math.Abs(z-math.Log(fc)) < math.Abs(near-math.Log(fc)) {
				near = z
			}
		}
		for _, zz := range [][]float64{zs, append(append([]float64{}, zs...), (near+math.Log(fc))/2)} {
			out = append(out, stopBandFits(d, zz, fc, hp, bic)...)
		}
	}
	return out
}

// stopBandFits fits all-pole sides of 2m and 2m+1 poles with the m zero
// pairs zs (ln f) around the corner fcHz.
func stopBandFits(d *fitData, zs []float64, fc float64, hp bool, bic func(fitted) float64) []fitted {
	var out []fitted
	m := len(zs)
	for _, n := range []int{2 * m, 2*m + 1} {
		if n > MaxSideOrder {
			continue
		}
		st := sideStructure(n, false)
		for range zs {
			st = append(st, ZeroPairJ)
		}
		if st.nParams()+4 >= len(d.y) {
			continue
		}
		if hp && n%2 == 1 {
			// A high-pass with stop-band zeros is a low-pass cascade
			// whose zeros lie below its poles, times s/(s+ω) when odd.
			st[n/2] = HighPass1
		}
		starts := polesWithZeros(d, st[:len(st)-m], zs, patternStarts(n, fc, hp))
		if f, ok := fitOneQ(d, st, starts); ok {
			f.bic = bic(f)
			out = append(out, f)
		}
	}
	return out
}

// polesWithZeros returns full starts (poles, then the zeros zs, ln f) for
// a cascade of the all-pole part poles and len(zs) zero pairs: the poles
// are first fitted from each pole start with the zeros held at zs (to the
// data less the zeros' gain), which keeps the first steps from moving the
// zeros away from the dips that located them.
func polesWithZeros(d *fitData, poles structure, zs []float64, poleStarts [][]float64) [][]float64 {
	held := *d
	held.y = make([]float64, len(d.y))
	for i := range d.y {
		held.y[i] = d.y[i]
		for _, z := range zs {
			g, _, _ := sectionDB(ZeroPairJ, d.lf[i], z, 0)
			held.y[i] -= g
		}
	}
	e := newEvaluator(&held, poles)
	e.boundQ()
	var out [][]float64
	for _, s := range poleStarts {
		x, f := e.lm(s)
		if math.IsInf(f, 0) || math.IsNaN(f) {
			x = s
		}
		out = append(out, append(append([]float64{}, x...), zs...))
	}
	return out
}
