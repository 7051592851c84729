package plan

import (
	"errors"
	"fmt"
	"math"
)

// Timing is the time model an estimate uses; the settle model implements
// it. PointSeconds returns the physical seconds one point takes, from
// setting the generator to hz (and vrms) until its reading is accepted,
// when the previous point was at prevHz and prevVrms. For the first point
// of a run prevHz and prevVrms are 0 (the output has just been switched
// on). The result must be finite and ≥ 0.
type Timing interface {
	PointSeconds(prevHz, hz, prevVrms, vrms float64) float64
}

// EstimateResult is how long a plan takes, in physical seconds (the
// simulated bench's time scale is not applied).
type EstimateResult struct {
	Points    int     // plan points
	PhysicalS float64 // time for the plan points, in measurement order
	// RefinePoints is the most points the corner refinement may add
	// (0 when refinement is off) and RefineS a rough time for them: the
	// mean time of a plan point each.
	RefinePoints int
	RefineS      float64
	// DriftPoints are the drift checks' re-measurements of the reference
	// ([drift]) and DriftS their time, with the return to the plan point
	// after each periodic one.
	DriftPoints int
	DriftS      float64
	TotalS      float64 // PhysicalS + RefineS + DriftS
	// SlowestHz is the plan point that takes longest, SlowestS its time.
	SlowestHz float64
	SlowestS  float64
}

// Estimate walks the plan's frequencies in measurement order and adds up
// t's time for each point. The level is level.vrms throughout (the
// "level" strategy's changes are not foreseen).
func Estimate(p *Plan, t Timing) (EstimateResult, error) {
	var r EstimateResult
	if p == nil || t == nil {
		return r, errors.New("plan: Estimate needs a plan and a timing model")
	}
	freqs, err := p.Freqs()
	if err != nil {
		return r, err
	}
	point := func(prevHz, hz float64) (float64, error) {
		prevVrms := p.Level.Vrms
		if prevHz == 0 {
			prevVrms = 0 // the output has just been switched on
		}
		s := t.PointSeconds(prevHz, hz, prevVrms, p.Level.Vrms)
		if math.IsNaN(s) || math.IsInf(s, 0) || s < 0 {
			return 0, fmt.Errorf("plan: timing model gives %v s for the point at %s Hz; want a finite time ≥ 0", s, fmtFloat(hz))
		}
		return s, nil
	}
	prevHz := 0.0
	for i, f := range freqs {
		s, err := point(prevHz, f.Hz)
		if err != nil {
			return r, err
		}
		r.PhysicalS += s
		if s > r.SlowestS || r.Points == 0 {
			r.SlowestHz, r.SlowestS = f.Hz, s
		}
		r.Points++
		prevHz = f.Hz
		if n := p.Drift.EveryPoints; n > 0 && (i+1)%n == 0 && i+1 < len(freqs) {
			// A periodic check: to the reference and back to the next
			// plan point, whose own time the loop counts from here.
			d, err := point(f.Hz, p.ReferenceHz)
			if err != nil {
				return r, err
			}
			r.DriftPoints++
			r.DriftS += d
			prevHz = p.ReferenceHz
		}
	}
	if p.Refine.Enabled {
		r.RefinePoints = p.Refine.MaxPoints
		r.RefineS = float64(r.RefinePoints) * r.PhysicalS / float64(r.Points)
	}
	if p.Drift.End == DriftOn && len(freqs) > 0 {
		d, err := point(prevHz, p.ReferenceHz)
		if err != nil {
			return r, err
		}
		r.DriftPoints++
		r.DriftS += d
	}
	r.TotalS = r.PhysicalS + r.RefineS + r.DriftS
	return r, nil
}
