package settle

import "math"

// Averager is the state of the converter's first-order mean-square
// average as a sweep models it (see the package documentation): from
// time T (physical seconds) the mean square moves from Y towards the
// input's mean square U (both Vrms²) as
//
//	y(t) = U + (Y − U)·e^(−(t − T)/τ),
//
// the step response of τ·dy/dt = u − y for a constant input u = U. The
// ripple at 2f is not part of it (see MeanSquareRipple). The zero value
// is an averager at rest on zero at time 0. Averager is a value: its
// methods return new states and never change the receiver.
type Averager struct {
	T float64 // physical seconds
	Y float64 // mean square at T, Vrms²
	U float64 // the input's mean square from T on, Vrms²
}

// RestAt returns an averager settled on the mean square yMS at time tS.
func RestAt(tS, yMS float64) Averager { return Averager{T: tS, Y: yMS, U: yMS} }

// At returns the mean square at time tS for the time constant tauS; an
// averager with tauS ≤ 0 follows its input at once.
func (a Averager) At(tS, tauS float64) float64 {
	if tauS <= 0 {
		return a.U
	}
	return a.U + (a.Y-a.U)*math.Exp(-(tS-a.T)/tauS)
}

// Step returns the state after the input's mean square steps to uMS at
// time tS: the path is continuous, only its target changes.
func (a Averager) Step(tS, tauS, uMS float64) Averager {
	return Averager{T: tS, Y: a.At(tS, tauS), U: uMS}
}

// StepTarget inverts the step response: the input mean square u that a
// first-order average of time constant tauS, at y0MS when the input
// stepped, must be heading for to read yMS tS after the step,
//
//	u = (y − y0·e^(−t/τ)) / (1 − e^(−t/τ)).
//
// It is NaN for tS ≤ 0 or tauS ≤ 0 (a reading at the step says nothing
// of the target).
func StepTarget(tauS, y0MS, tS, yMS float64) float64 {
	if !(tS > 0) || !(tauS > 0) {
		return math.NaN()
	}
	e := math.Exp(-tS / tauS)
	return (yMS - y0MS*e) / (1 - e)
}
