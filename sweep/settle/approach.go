package settle

import (
	"errors"
	"math"

	"gonum.org/v1/gonum/mat"
)

// Prediction of a converter's settled value from its approach.
//
// A first-order mean-square averager approaches its final value
// exponentially on the mean square (see Averager):
//
//	m(t) = m∞ + b·e^(−t/τ),   b = m(0) − m∞,
//
// so readings taken well before the approach has reached a tolerance
// already fix m∞. FitApproach fits the three parameters (m∞, b, τ) by
// weighted least squares, with a Gaussian prior on τ (what the profile
// says, or what earlier approaches on the range showed), by variable
// projection: for a given τ the model is linear in m∞ and b, so the
// weighted residual sum χ²(τ) (plus the prior's term) is minimised over τ
// alone, on a grid and then by golden-section search. The parameters'
// covariance is the inverse of JᵀWJ at the minimum, the prior a row of J
// (the Gauss-Newton approximation; JCGM 100:2008 §5.1.2 propagation to
// first order), inflated by χ²/ν when the fit's residuals are larger than
// the readings' noise explains (the Birge ratio, common practice).
//
// Three noise-free readings equally spaced by Δ and no prior give Aitken's
// Δ² extrapolation exactly: m∞ = (m0·m2 − m1²)/(m0 + m2 − 2·m1),
// τ = Δ/ln((m1 − m0)/(m2 − m1)).

// ApproachOpts are what FitApproach fits besides the approach.
type ApproachOpts struct {
	// TauS is the prior time constant, UTauS its standard uncertainty: 0
	// holds τ fixed, +Inf leaves it free, anything between weighs the
	// readings against the prior.
	TauS, UTauS float64
	// RippleHz, when positive, is the fundamental of a ripple on the
	// readings (the converter's 2f ripple the aperture leaves) fitted
	// alongside as Harmonics sine-cosine pairs at its multiples: a
	// stationary ripple of constant amplitude on the mean square (to
	// first order in the ripple).
	RippleHz  float64
	Harmonics int
	// NoiseFromResiduals says the deviations given are relative weights
	// only: the readings' noise is estimated from the fit's residuals
	// (χ²/ν, a Type A evaluation, JCGM 100:2008 §4.2) and the covariance
	// scaled by it either way. The residual test then cannot tell a
	// wrong model from noise, and Exponential reports true.
	NoiseFromResiduals bool
}

// ApproachFit is a first-order approach fitted to readings of the mean
// square. Times are seconds from the step; mean squares in the readings'
// unit squared.
type ApproachFit struct {
	MInf  float64 // the settled mean square
	B     float64 // the transient at t = 0, m(0) − m∞
	TauS  float64 // the time constant
	UMInf float64 // standard uncertainty of MInf
	UTauS float64 // standard uncertainty of TauS (0: τ held fixed)
	// Chi2 is the weighted residual sum of squares of the readings (the
	// prior's term left out), Dof its degrees of freedom (readings less
	// the parameters the readings alone determine).
	Chi2 float64
	Dof  int
	// SigmaScale is the factor on the deviations given that the
	// covariance was computed with: above 1 where the residuals exceed
	// them (the Birge ratio), anything with NoiseFromResiduals.
	SigmaScale float64
	o          ApproachOpts
	lin        []float64   // the linear parameters: m∞, b, then ripple pairs
	cov        [][]float64 // over the linear parameters, then τ
}

// ErrFewReadings is returned by FitApproach with too few readings for
// the parameters it must fit.
var ErrFewReadings = errors.New("settle: too few readings for an approach fit")

// basis fills g with the model's linear basis at t for the time constant
// tau: 1, e^(−t/τ), then cos and sin of each ripple harmonic.
func (o ApproachOpts) basis(g []float64, t, tau float64) {
	g[0], g[1] = 1, math.Exp(-t/tau)
	harmonicTerms(g[2:2+2*o.harmonics()], 2*math.Pi*o.RippleHz*t)
}

func (o ApproachOpts) harmonics() int {
	if !(o.RippleHz > 0) {
		return 0
	}
	return max(o.Harmonics, 1)
}

// URel returns the relative standard uncertainty of the settled RMS
// √MInf: UMInf/(2·MInf), to first order.
func (f ApproachFit) URel() float64 { return f.UMInf / (2 * f.MInf) }

// At returns the fitted mean square at tS without the ripple: the
// approach.
func (f ApproachFit) At(tS float64) float64 { return f.MInf + f.B*math.Exp(-tS/f.TauS) }

// Reading returns what the fit says a reading at tS reads: the approach
// and the ripple.
func (f ApproachFit) Reading(tS float64) float64 {
	if len(f.lin) == 0 {
		return math.NaN() // the zero value
	}
	g := make([]float64, len(f.lin))
	f.o.basis(g, tS, f.TauS)
	var v float64
	for i := range g {
		v += g[i] * f.lin[i]
	}
	return v
}

// UAt returns the standard uncertainty of the fitted approach at tS.
func (f ApproachFit) UAt(tS float64) float64 { return f.u(tS, false) }

// UReading returns the standard uncertainty of Reading(tS).
func (f ApproachFit) UReading(tS float64) float64 { return f.u(tS, true) }

func (f ApproachFit) u(tS float64, ripple bool) float64 {
	k := len(f.lin)
	if k == 0 {
		return math.NaN() // the zero value
	}
	g := make([]float64, len(f.cov))
	f.o.basis(g[:k], tS, f.TauS)
	if !ripple {
		for i := 2; i < k; i++ {
			g[i] = 0
		}
	}
	if len(g) > k {
		g[k] = f.B * tS / (f.TauS * f.TauS) * math.Exp(-tS/f.TauS)
	}
	var v float64
	for i := range g {
		for j := range g {
			v += g[i] * f.cov[i][j] * g[j]
		}
	}
	return math.Sqrt(math.Max(v, 0))
}

// Exponential reports whether the fit's residuals are what the readings'
// noise explains: χ² within its expectation ν plus five standard
// deviations √(2ν) (the χ² distribution's mean and variance; a fit is
// judged after every reading, so a false alarm must be rare), so that an
// approach that is not one exponential (a second pole, a hold, drift) is
// refused when the readings can tell.
func (f ApproachFit) Exponential() bool {
	if f.Dof <= 0 || f.o.NoiseFromResiduals {
		return true
	}
	nu := float64(f.Dof)
	return f.Chi2 <= nu+5*math.Sqrt(2*nu)+2
}

// FitApproach fits m(t) = m∞ + b·e^(−t/τ) (plus the ripple o asks for)
// to the mean squares mMS read at tS (seconds from the step) with
// standard deviations sigma (same length, each > 0), τ with the prior of
// o. The search for τ stays within a factor of four of o.TauS. It needs
// a reading per linear parameter (two, and two per ripple harmonic), and
// one more with τ free.
func FitApproach(tS, mMS, sigma []float64, o ApproachOpts) (ApproachFit, error) {
	n := len(tS)
	tauS, uTauS := o.TauS, o.UTauS
	if len(mMS) != n || len(sigma) != n {
		return ApproachFit{}, errors.New("settle: approach fit: times, readings and deviations differ in length")
	}
	if !(tauS > 0) || !(uTauS >= 0) {
		return ApproachFit{}, errors.New("settle: approach fit: the time constant and its uncertainty must be positive")
	}
	for _, s := range sigma {
		if !(s > 0) || math.IsInf(s, 0) {
			return ApproachFit{}, errors.New("settle: approach fit: every deviation must be positive and finite")
		}
	}
	k := 2 + 2*o.harmonics()
	free := math.IsInf(uTauS, 1)
	need := k
	if free {
		need++
	}
	if n < need {
		return ApproachFit{}, ErrFewReadings
	}
	prior := func(tau float64) float64 {
		if free || uTauS == 0 {
			return 0
		}
		d := (tau - tauS) / uTauS
		return d * d
	}
	tau := tauS
	if uTauS > 0 {
		obj := func(lt float64) float64 {
			t := math.Exp(lt)
			c, _ := linearFit(tS, mMS, sigma, t, o, k)
			return c + prior(t)
		}
		lo, hi := math.Log(tauS/4), math.Log(tauS*4)
		const grid = 48
		best, bestI := math.Inf(1), 0
		for i := 0; i <= grid; i++ {
			if v := obj(lo + (hi-lo)*float64(i)/grid); v < best {
				best, bestI = v, i
			}
		}
		a := lo + (hi-lo)*float64(max(bestI-1, 0))/grid
		b := lo + (hi-lo)*float64(min(bestI+1, grid))/grid
		tau = math.Exp(goldenMin(obj, a, b, 1e-10))
	}
	chi2, lin := linearFit(tS, mMS, sigma, tau, o, k)
	if lin == nil {
		return ApproachFit{}, errors.New("settle: approach fit: the readings do not determine the approach (no transient, or readings too close together)")
	}
	f := ApproachFit{MInf: lin[0], B: lin[1], TauS: tau, Chi2: chi2, Dof: n - k, o: o, lin: lin}
	// JᵀWJ over the linear parameters and τ.
	np := k
	if uTauS > 0 {
		np++
	}
	h := make([][]float64, np)
	for r := range h {
		h[r] = make([]float64, np)
	}
	g := make([]float64, np)
	for i := range tS {
		o.basis(g[:k], tS[i], tau)
		if np > k {
			g[k] = f.B * tS[i] / (tau * tau) * g[1]
		}
		w := 1 / (sigma[i] * sigma[i])
		for r := 0; r < np; r++ {
			for c := 0; c < np; c++ {
				h[r][c] += w * g[r] * g[c]
			}
		}
	}
	if np > k {
		if !free {
			h[k][k] += 1 / (uTauS * uTauS)
		} else {
			f.Dof--
		}
	}
	cov, ok := invertSym(h)
	if !ok {
		return ApproachFit{}, errors.New("settle: approach fit: the readings do not determine the approach (no transient, or readings at one time)")
	}
	f.SigmaScale = 1
	if f.Dof > 0 {
		if birge := f.Chi2 / float64(f.Dof); birge > 1 || o.NoiseFromResiduals {
			for r := range cov {
				for c := range cov[r] {
					cov[r][c] *= birge
				}
			}
			f.SigmaScale = math.Sqrt(birge)
		}
	} else if o.NoiseFromResiduals {
		return ApproachFit{}, ErrFewReadings
	}
	f.cov = cov
	f.UMInf = math.Sqrt(math.Max(cov[0][0], 0))
	if np > k {
		f.UTauS = math.Sqrt(math.Max(cov[k][k], 0))
	}
	return f, nil
}

// linearFit fits the k linear parameters for a fixed τ by weighted least
// squares and returns the residual sum χ² with them (lin nil when the
// readings do not determine them).
func linearFit(tS, mMS, sigma []float64, tau float64, o ApproachOpts, k int) (chi2 float64, lin []float64) {
	a := make([][]float64, k)
	for r := range a {
		a[r] = make([]float64, k)
	}
	rhs := make([]float64, k)
	g := make([]float64, k)
	for i := range tS {
		o.basis(g, tS[i], tau)
		w := 1 / (sigma[i] * sigma[i])
		for r := 0; r < k; r++ {
			rhs[r] += w * g[r] * mMS[i]
			for c := 0; c < k; c++ {
				a[r][c] += w * g[r] * g[c]
			}
		}
	}
	inv, ok := invertSym(a)
	if !ok {
		return math.Inf(1), nil
	}
	lin = make([]float64, k)
	for r := 0; r < k; r++ {
		for c := 0; c < k; c++ {
			lin[r] += inv[r][c] * rhs[c]
		}
	}
	for i := range tS {
		o.basis(g, tS[i], tau)
		v := 0.0
		for r := 0; r < k; r++ {
			v += g[r] * lin[r]
		}
		d := (mMS[i] - v) / sigma[i]
		chi2 += d * d
	}
	return chi2, lin
}

// goldenMin returns the minimiser of f on [a, b] by golden-section search
// to the relative width tol.
func goldenMin(f func(float64) float64, a, b, tol float64) float64 {
	const g = 0.6180339887498949 // (√5 − 1)/2
	c, d := b-g*(b-a), a+g*(b-a)
	fc, fd := f(c), f(d)
	for i := 0; i < 200 && math.Abs(b-a) > tol*(1+math.Abs(a)+math.Abs(b)); i++ {
		if fc < fd {
			b, d, fd = d, c, fc
			c = b - g*(b-a)
			fc = f(c)
		} else {
			a, c, fc = c, d, fd
			d = a + g*(b-a)
			fd = f(d)
		}
	}
	return (a + b) / 2
}

// invertSym inverts a symmetric positive semi-definite matrix, scaled to
// a unit diagonal first, by Cholesky factorisation; ok is false when it
// is not positive definite or singular to working precision (reciprocal
// condition under 1e-13).
func invertSym(m [][]float64) (inv [][]float64, ok bool) {
	n := len(m)
	d := make([]float64, n)
	for r := 0; r < n; r++ {
		if !(m[r][r] > 0) {
			return nil, false
		}
		d[r] = 1 / math.Sqrt(m[r][r])
	}
	a := mat.NewSymDense(n, nil)
	for r := 0; r < n; r++ {
		for c := r; c < n; c++ {
			a.SetSym(r, c, m[r][c]*d[r]*d[c])
		}
	}
	var chol mat.Cholesky
	if !chol.Factorize(a) || !(chol.Cond() < 1e13) {
		return nil, false
	}
	var ai mat.SymDense
	if err := chol.InverseTo(&ai); err != nil {
		return nil, false
	}
	inv = make([][]float64, n)
	for r := 0; r < n; r++ {
		inv[r] = make([]float64, n)
		for c := 0; c < n; c++ {
			inv[r][c] = ai.At(r, c) * d[r] * d[c]
		}
	}
	return inv, true
}
