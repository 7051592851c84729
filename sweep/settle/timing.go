package settle

import (
	"math"

	"rolloff/driver"
	"rolloff/sweep/plan"
)

// Timing is the settle model's time per point for plan estimates
// (plan.Timing). It knows the converter and the voltmeter but not the
// DUT: between two points it assumes the DUT's output changes as a slope
// of SlopeDBPerDecade (0: a flat DUT, every step within the tolerance;
// 20: a first-order roll-off at every point, a pessimistic bound), on the
// range where the DUT output (taken as the generator level times
// LevelGain) lands in the window.
type Timing struct {
	Ranges []driver.Range
	Window driver.Window
	Meter  Meter
	// Tol, Readings, MinDwellS are the plan's settle policy.
	Tol              float64
	Readings         int
	MinDwellS        float64
	SlopeDBPerDecade float64
	// LevelGain is the DUT gain assumed for choosing the range (1 if 0).
	LevelGain float64
	// ACTauS, when set (an AC-reading DMM, no converter), is the meter's
	// own settling time constant at a frequency, which paces the points
	// instead of a converter's; a meter stating none (0) is read once per
	// reading, taken as settled.
	ACTauS func(freqHz float64) float64
}

var _ plan.Timing = (*Timing)(nil)

// tau returns the time constant of the range vrms lands on.
func (t *Timing) tau(vrms float64) float64 {
	if len(t.Ranges) == 0 {
		return 0
	}
	g := t.LevelGain
	if g <= 0 {
		g = 1
	}
	v := vrms * g
	best, bestFS := -1, math.Inf(1)
	for i, r := range t.Ranges {
		if v <= r.FullScaleVrms*t.Window.OverFraction && r.FullScaleVrms < bestFS {
			best, bestFS = i, r.FullScaleVrms
		}
	}
	if best < 0 {
		for i, r := range t.Ranges {
			if best < 0 || r.FullScaleVrms > t.Ranges[best].FullScaleVrms {
				best = i
			}
		}
	}
	return t.Ranges[best].TimeConstantS
}

// PointSeconds implements plan.Timing: the model dwell for the assumed
// step, the hold guard when there is a dwell, and the readings at the
// aperture ChooseAperture picks.
func (t *Timing) PointSeconds(prevHz, hz, prevVrms, vrms float64) float64 {
	tau := t.tau(vrms)
	if t.ACTauS != nil {
		tau = t.ACTauS(hz)
	}
	var dwell float64
	if prevHz <= 0 || prevVrms <= 0 {
		dwell = tau * math.Log(1/(2*t.Tol-t.Tol*t.Tol))
	} else {
		dec := math.Abs(math.Log10(hz / prevHz))
		// Falling (the costlier direction: the tolerance is relative to
		// the smaller value).
		ratio := vrms / prevVrms / math.Pow(10, t.SlopeDBPerDecade*dec/20)
		dwell = DwellS(tau, 1, ratio, t.Tol)
	}
	rd, _ := ChooseAperture(hz, tau, 0.25*t.Tol, t.Meter)
	if t.ACTauS != nil && tau <= 0 && t.Meter.Fixed {
		rd = Reading{ApertureS: t.Meter.Shortest(), Average: 1}
	}
	n := t.Readings
	if n < 2 {
		n = 2
	}
	return dwell + t.MinDwellS + float64(n)*rd.TimeS(t.Meter)
}
