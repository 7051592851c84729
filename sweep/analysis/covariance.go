package analysis

import (
	"math"
	"sort"

	"gonum.org/v1/gonum/interp"
	"gonum.org/v1/gonum/mat"
)

// covariance is the covariance of the accepted model's shape parameters
// (ln f0, ln Q… in the order of st), from the weighted least-squares fit:
// C = s²·(JᵀWJ)⁻¹ with J the Jacobian at the optimum (the gain projected
// out) and s² = χ²/(n−k) — the residual with its degrees of freedom — or,
// when the points declare their uncertainty, max(1, χ²/(n−k)) (JCGM
// 100:2008 §H.3 for the least-squares form; the Birge ratio for the
// scaling, from memory).
type covariance struct {
	st    structure
	theta []float64
	c     *mat.SymDense
	// The fit's linear response to a shift of its data: the projected
	// Jacobian of the residuals (n×np), the weights, the fit points'
	// log10 f and (JᵀWJ)⁻¹ unscaled.
	jac, w, xs []float64
	c0         *mat.SymDense
}

func newCovariance(d *fitData, f fitted, declared bool) *covariance {
	th := thetaOfModel(f)
	e := newEvaluator(d, f.st)
	np := e.np
	if np == 0 || len(th) != np {
		return nil
	}
	e.eval(th)
	info := mat.NewSymDense(np, nil)
	for a := 0; a < np; a++ {
		for b := a; b < np; b++ {
			var t float64
			for i := range d.y {
				t += d.w[i] * e.jac[i*np+a] * e.jac[i*np+b]
			}
			info.SetSym(a, b, t)
		}
	}
	var chol mat.Cholesky
	if !chol.Factorize(info) {
		return nil
	}
	c := mat.NewSymDense(np, nil)
	if err := chol.InverseTo(c); err != nil {
		return nil
	}
	dof := float64(len(d.y) - np - 1)
	if dof < 1 {
		return nil
	}
	c0 := mat.NewSymDense(np, nil)
	c0.CopySym(c)
	scale := f.chi2 / dof
	if declared {
		scale = math.Max(1, scale)
	}
	c.ScaleSym(scale, c)
	return &covariance{st: f.st, theta: th, c: c, jac: append([]float64(nil), e.jac...), w: append([]float64(nil), d.w...),
		xs: append([]float64(nil), d.xs...), c0: c0}
}

// cornerShift returns the change of ln fc for a corner at xc on the model
// m (reference at ref) when the fitted data shift by delta (dB, one per
// fit point): the fit's parameters move by Δθ = −(JᵀWJ)⁻¹JᵀW·δ (the
// linearised least-squares solution, JCGM 100:2008 §H.3; a shift common
// to every point goes into the gain, which the projected Jacobian
// leaves out), and ln fc by ∇ln fc · Δθ.
func (cv *covariance) cornerShift(m *Model, xc float64, ref []float64, delta []float64) float64 {
	v := cv.cornerGrad(m, xc, ref)
	if v == nil || len(delta) != len(cv.w) {
		return math.NaN()
	}
	np := len(cv.theta)
	jtw := mat.NewVecDense(np, nil)
	for i, dl := range delta {
		if dl == 0 {
			continue
		}
		for a := 0; a < np; a++ {
			jtw.SetVec(a, jtw.AtVec(a)+cv.jac[i*np+a]*cv.w[i]*dl)
		}
	}
	var dth mat.VecDense
	dth.MulVec(cv.c0, jtw)
	return -mat.Dot(v, &dth)
}

// cornerGrad returns ∂ln fc/∂θ for a corner at xc on the model m, the
// reference at ref (see cornerU); nil where the slope is zero.
func (cv *covariance) cornerGrad(m *Model, xc float64, ref []float64) *mat.VecDense {
	np := len(cv.theta)
	gc, gr, tmp := make([]float64, np), make([]float64, np), make([]float64, np)
	cv.grad(xc, gc)
	for _, x := range ref {
		cv.grad(x, tmp)
		for i := range gr {
			gr[i] += tmp[i] / float64(len(ref))
		}
	}
	slope := m.slopeLog(xc) / math.Ln10 // dB per neper
	if slope == 0 {
		return nil
	}
	v := mat.NewVecDense(np, nil)
	for i := range gc {
		v.SetVec(i, -(gc[i]-gr[i])/slope)
	}
	return v
}

// grad returns ∂g/∂θ at x = log10 f for the model of the covariance.
func (cv *covariance) grad(x float64, out []float64) {
	lf := x * math.Ln10
	j := 0
	for _, k := range cv.st {
		q := 0.0
		if k.nParams() == 2 {
			q = cv.theta[j+1]
		}
		_, dp, dq := sectionDB(k, lf, cv.theta[j], q)
		out[j] = dp
		if k.nParams() == 2 {
			out[j+1] = dq
		}
		j += k.nParams()
	}
}

// cornerU returns the standard uncertainty of ln fc for a corner at xc on
// the model m, the reference taken at xRef (or, for a band, averaged over
// xa..xb): the implicit function g(xc) − g(ref) = level gives
// ∂ln fc/∂θ = −(∂g(xc)/∂θ − ∂g(ref)/∂θ)/(∂g/∂ln f at xc), then
// u² = ∇ᵀ C ∇ (the law of propagation, JCGM 100:2008 §5.1.2). At a maximum
// the reference's own shift does not matter to first order.
func (cv *covariance) cornerU(m *Model, xc float64, ref []float64) float64 {
	if cv == nil {
		return math.NaN()
	}
	v := cv.cornerGrad(m, xc, ref)
	if v == nil {
		return math.NaN()
	}
	return math.Sqrt(math.Max(mat.Inner(v, cv.c, v), 0))
}

// altInterpolants are the other interpolants through the points whose
// crossings measure the interpolation's method error: Akima's spline and
// the not-a-knot cubic spline (gonum's implementations).
type altCurve struct{ p interp.Predictor }

func (c altCurve) atLog(x float64) float64 { return c.p.Predict(x) }
func (c altCurve) slopeLog(x float64) float64 {
	if d, ok := c.p.(interp.DerivativePredictor); ok {
		return d.PredictDerivative(x)
	}
	return 0
}

func altInterpolants(xs, ys []float64) []curve {
	var out []curve
	if len(xs) >= 5 {
		var ak interp.AkimaSpline
		if ak.Fit(xs, ys) == nil {
			out = append(out, altCurve{&ak})
		}
	}
	if len(xs) >= 4 {
		var nk interp.NotAKnotCubic
		if nk.Fit(xs, ys) == nil {
			out = append(out, altCurve{&nk})
		}
	}
	return out
}

// methodU is the interpolation's method error at a crossing xc of level:
// the largest distance (in ln f) to the nearest crossing of the same level
// by each alternative interpolant, fitted to the eight points around xc; a
// curve without a crossing there counts as a distance of one interval.
func methodU(xs, ys []float64, xc, level float64) float64 {
	var u float64
	i := sort.SearchFloat64s(xs, xc)
	i = max(1, min(i, len(xs)-1))
	width := xs[i] - xs[i-1]
	lo, hi := max(i-4, 0), min(i+4, len(xs))
	wx, wy := xs[lo:hi], ys[lo:hi]
	for _, c := range altInterpolants(wx, wy) {
		best := math.Inf(1)
		for _, x := range crossings(c, denseGrid(wx, width/4), level) {
			best = math.Min(best, math.Abs(x-xc))
		}
		if math.IsInf(best, 1) {
			best = width
		}
		u = math.Max(u, best*math.Ln10)
	}
	return u
}
