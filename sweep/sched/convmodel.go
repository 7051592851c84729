package sched

import "rolloff/sweep/settle"

// What a range change does to the converter's averaged state.
const (
	rangeUnknown    = iota
	rangeByInput    // the state is the input's mean square: continuous in volts
	rangeByFraction // the state is a fraction of full scale: it jumps by the range ratio
)

// convModel is what the scheduler believes of the converter's averaged
// state: a first-order average of the input's mean square (Vrms²), on the
// time constant of the range in use, and after a range change whose
// effect is not yet known the alternative state (the mean square as the
// old fraction of full scale on the new range). Its dwells take the worse
// of the two.
type convModel struct {
	avg settle.Averager
	// alt is the alternative state's mean square at avg.T, heading for
	// avg.U, while altOn.
	alt   float64
	altOn bool
	// rangeModel is what a range change does to the state, learnt from
	// the first reading after the first change.
	rangeModel int
}

// at returns the input mean square at physical time t.
func (m *convModel) at(t, tauS float64) float64 { return m.avg.At(t, tauS) }

// step records that the converter's input steps to the mean square uMS
// at t.
func (m *convModel) step(t, tauS, uMS float64) {
	if m.altOn && tauS > 0 {
		m.alt = settle.Averager{T: m.avg.T, Y: m.alt, U: m.avg.U}.At(t, tauS)
	}
	m.avg = m.avg.Step(t, tauS, uMS)
}

// rest records that the state is yMS, settled, at t (a measured value).
func (m *convModel) rest(t, yMS float64) { m.avg = settle.RestAt(t, yMS) }

// rangeChanged records a range change at t from a range of time constant
// tauS to one k times its full scale.
func (m *convModel) rangeChanged(t, tauS, k float64) {
	m.avg = m.avg.Step(t, tauS, m.avg.U)
	// If the state is continuous in fraction of full scale rather than in
	// input volts, it now stands at the old fraction on the new range.
	m.alt = m.avg.Y * k * k
	switch m.rangeModel {
	case rangeByInput:
		m.altOn = false
	case rangeByFraction:
		m.avg, m.altOn = settle.RestAt(t, m.alt), false
	default:
		m.altOn = true
	}
}
