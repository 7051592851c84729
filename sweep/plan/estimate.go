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
	TotalS       float64 // PhysicalS + RefineS
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
	prevHz, prevVrms := 0.0, 0.0
	for _, f := range freqs {
		s := t.PointSeconds(prevHz, f.Hz, prevVrms, p.Level.Vrms)
		if math.IsNaN(s) || math.IsInf(s, 0) || s < 0 {
			return r, fmt.Errorf("plan: timing model gives %v s for the point at %s Hz; want a finite time ≥ 0", s, fmtFloat(f.Hz))
		}
		r.PhysicalS += s
		if s > r.SlowestS || r.Points == 0 {
			r.SlowestHz, r.SlowestS = f.Hz, s
		}
		r.Points++
		prevHz, prevVrms = f.Hz, p.Level.Vrms
	}
	if p.Refine.Enabled {
		r.RefinePoints = p.Refine.MaxPoints
		r.RefineS = float64(r.RefinePoints) * r.PhysicalS / float64(r.Points)
	}
	r.TotalS = r.PhysicalS + r.RefineS
	return r, nil
}
