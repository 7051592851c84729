package model

import (
	"math"
	"math/cmplx"
)

// The least time to know a converter's value, from the averager's
// physics alone (see the package documentation for the solution).
//
// After the input changes at t = 0 to ms (its phase reference at the
// change), the averager's state is y(t) = y_ss(t) + (y0 − y_ss(0))·e^{−t/τ}:
// a steady part that ripples about C0 and a transient. Averaged over the
// ripple, the state approaches C0 exponentially (the first-order step
// response, m(t) = m∞ + (m0 − m∞)·e^{−t/τ}):
//
//	m(t) = C0 + (y0 − y_ss(0))·e^{−t/τ}.
//
// A reading of the converter's output √y is within a relative tol of
// the settled √C0 only once √(m/C0) is within [1 − tol, 1 + tol]; before
// that no reading of the output (as opposed to a prediction of its
// future) is within the tolerance, whatever its aperture or timing, except
// by the ripple's chance. Solving for t, with d = |y0 − y_ss(0)|/C0 and
// ε = (1+tol)² − 1 above the final value, 1 − (1−tol)² below it:
//
//	t = τ·ln(d/ε)   (0 when d ≤ ε).
//
// The reading itself then takes an aperture: the 2f ripple (and its
// harmonics), Re(B_k e^{jkωt}) on the state with B_k = A_k/(1+jkωτ), is
// about |B_k|/(2·C0) relative on the root (first order in the ripple),
// and a mean over an aperture T of a sinusoid of angular frequency Ω at
// the worst phase keeps |sin(ΩT/2)/(ΩT/2)| of its amplitude (the mean of
// a sinusoid over an interval). ApertureS returns the least T for which
// the sum of these is within tol.

// ApproachS returns the time after the input changes to ms at t = 0
// (phase reference at the change) for the ripple-averaged state of a
// first-order averager of time constant tauS, starting from the state
// y0 (V²), to come within tol of the settled value, relative on the root
// (tol in (0, 1)). It is 0 when the state starts within tol, +Inf when
// the settled mean square is not positive.
func ApproachS(y0 float64, ms MeanSquare, tauS, tol float64) float64 {
	if !(ms.C0 > 0) || !(tauS > 0) || !(tol > 0 && tol < 1) {
		return math.Inf(1)
	}
	w := 2 * math.Pi * ms.FreqHz
	yss0 := ms.C0
	for _, term := range ms.Terms {
		yss0 += real(term.A / complex(1, float64(term.K)*w*tauS))
	}
	trans := y0 - yss0
	eps := (1+tol)*(1+tol) - 1
	if trans < 0 {
		eps = 1 - (1-tol)*(1-tol)
	}
	d := math.Abs(trans) / ms.C0
	if d <= eps {
		return 0
	}
	return tauS * math.Log(d/eps)
}

// RippleRel returns, for a settled averager of time constant tauS on the
// input ms, the worst-phase relative error of the mean of the root over
// an aperture of apertureS seconds, to first order in the ripple:
// Σ |B_k|/(2·C0)·|sinc(kωT/2)|, B_k = A_k/(1+jkωτ). An aperture of 0 is
// an instantaneous reading.
func RippleRel(ms MeanSquare, tauS, apertureS float64) float64 {
	if !(ms.C0 > 0) {
		return 0
	}
	w := 2 * math.Pi * ms.FreqHz
	var sum float64
	for _, term := range ms.Terms {
		om := float64(term.K) * w
		amp := cmplx.Abs(term.A/complex(1, om*tauS)) / (2 * ms.C0)
		if x := om * apertureS / 2; x > 0 {
			amp *= math.Abs(math.Sin(x) / x)
		}
		sum += amp
	}
	return sum
}

// ApertureS returns the least aperture, not below minS, over which one
// reading of a settled averager of time constant tauS on the input ms is
// within tol of its mean at any phase of the ripple (RippleRel ≤ tol).
// Every term nulls over a whole number of periods of the terms' common
// fundamental, 1/(g·f) with g the greatest common divisor of their K, so
// the answer is at most the first multiple of that period not below minS.
func ApertureS(ms MeanSquare, tauS, tol, minS float64) float64 {
	minS = math.Max(minS, 0)
	if RippleRel(ms, tauS, minS) <= tol || len(ms.Terms) == 0 || !(ms.FreqHz > 0) {
		return minS
	}
	g := 0
	for _, term := range ms.Terms {
		g = gcd(g, term.K)
	}
	period := 1 / (float64(g) * ms.FreqHz)
	hi := math.Ceil(minS/period) * period
	if hi <= minS {
		hi += period
	}
	// The first crossing: scan upward on a grid fine against the highest
	// term's period, then bisect.
	kMax := 0
	for _, term := range ms.Terms {
		kMax = max(kMax, term.K)
	}
	step := math.Min((hi-minS)/64, 1/(8*float64(kMax)*ms.FreqHz))
	lo := minS
	for t := minS + step; t < hi; t += step {
		if RippleRel(ms, tauS, t) <= tol {
			hi = t
			break
		}
		lo = t
	}
	for i := 0; i < 60 && hi-lo > 1e-12*hi; i++ {
		mid := (lo + hi) / 2
		if RippleRel(ms, tauS, mid) <= tol {
			hi = mid
		} else {
			lo = mid
		}
	}
	return hi
}

func gcd(a, b int) int {
	for b != 0 {
		a, b = b, a%b
	}
	if a < 0 {
		return -a
	}
	return a
}
