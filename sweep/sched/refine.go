package sched

import (
	"context"
	"math"
	"sort"

	"rolloff/sweep/plan"
	"rolloff/sweep/point"
)

// Corner refinement.

func (s *sweeper) refinedCount() int {
	n := 0
	for _, p := range s.prog.pts {
		if p.Index >= s.prog.nPlan && !p.Has(point.FlagDriftCheck) {
			n++
		}
	}
	return n
}

// driftCount returns the drift checks measured so far.
func (s *sweeper) driftCount() int {
	n := 0
	for _, p := range s.prog.pts {
		if p.Has(point.FlagDriftCheck) {
			n++
		}
	}
	return n
}

// nextIndex returns the index of a point added beyond the plan's (a
// refinement or a drift check): past every index stored.
func (s *sweeper) nextIndex() int {
	n := s.prog.nPlan
	for _, p := range s.prog.pts {
		n = max(n, p.Index+1)
	}
	return n
}

// driftCheck measures the plan's reference frequency again, flagged
// drift-check, its range and gain predicted from the sweep's points
// around it.
func (s *sweeper) driftCheck(ctx context.Context) error {
	refHz := s.plan.ReferenceHz
	if refHz <= 0 {
		refHz = plan.DefaultReferenceHz
	}
	pg := 0.0
	if db, ok := referenceDB(s.sortedPoints(), refHz); ok {
		pg = math.Pow(10, db/20)
	}
	s.prog.drift = true
	defer func() { s.prog.drift = false }()
	return s.measure(ctx, s.nextIndex(), refHz, false, pg)
}

// refineExpected estimates how many points the corner refinement will add:
// for each of two corners, the bisections in log f that take a bracket of
// one plan step down to the resolution, within the plan's maximum.
func (s *sweeper) refineExpected() int {
	rf := s.plan.Refine
	if !rf.Enabled || len(s.prog.freqs) < 2 || !(rf.ResolutionRel > 0) {
		return 0
	}
	mid := len(s.prog.freqs) / 2
	step := math.Abs(math.Log(s.prog.freqs[mid].Hz / s.prog.freqs[mid-1].Hz))
	if !(step > 0) {
		return 0
	}
	per := int(math.Ceil(math.Log2(step / math.Log1p(rf.ResolutionRel))))
	n := 2 * max(per, 0)
	if rf.MaxPoints > 0 {
		n = min(n, rf.MaxPoints)
	}
	return n
}

// sortedPoints returns the usable points by frequency.
func (s *sweeper) sortedPoints() []point.Point {
	var v []point.Point
	for _, p := range s.prog.pts {
		if !p.Excluded() && p.VinVrms > 0 && p.VoutVrms > 0 {
			v = append(v, p)
		}
	}
	sort.SliceStable(v, func(a, b int) bool { return v[a].FreqHz < v[b].FreqHz })
	return v
}

// referenceDB returns the gain at the plan's reference frequency,
// interpolated linearly in log f between the points around it (the
// nearest point outside the measured span).
func referenceDB(pts []point.Point, refHz float64) (float64, bool) {
	if len(pts) == 0 {
		return 0, false
	}
	if refHz <= pts[0].FreqHz {
		return pts[0].GainDB, true
	}
	for i := 1; i < len(pts); i++ {
		if pts[i].FreqHz >= refHz {
			a, b := pts[i-1], pts[i]
			x := math.Log(refHz/a.FreqHz) / math.Log(b.FreqHz/a.FreqHz)
			return a.GainDB + x*(b.GainDB-a.GainDB), true
		}
	}
	return pts[len(pts)-1].GainDB, true
}

// refine bisects, in log f, each bracket of consecutive points around a
// crossing of reference + level until it is narrower than the
// resolution, the lowest corner first, within the refinement budget.
func (s *sweeper) refine(ctx context.Context) error {
	rf := s.plan.Refine
	if !rf.Enabled {
		return nil
	}
	res := rf.ResolutionRel
	if res <= 0 {
		res = plan.DefaultResolution
	}
	budget := rf.MaxPoints
	if budget <= 0 {
		budget = plan.DefaultRefinePoints
	}
	refHz := s.plan.ReferenceHz
	if refHz <= 0 {
		refHz = plan.DefaultReferenceHz
	}
	for s.refinedCount() < budget && len(s.prog.pts) < plan.MaxPoints {
		pts := s.sortedPoints()
		ref, ok := referenceDB(pts, refHz)
		if !ok {
			return nil
		}
		lvl := ref + rf.LevelDB
		found := false
		for i := 1; i < len(pts); i++ {
			a, b := pts[i-1], pts[i]
			da, db := a.GainDB-lvl, b.GainDB-lvl
			if da*db > 0 || da == db || b.FreqHz/a.FreqHz-1 <= res {
				continue
			}
			f := math.Sqrt(a.FreqHz * b.FreqHz)
			// Predict the gain halfway by interpolation in log f.
			ga := a.VoutVrms / a.VinVrms
			gb := b.VoutVrms / b.VinVrms
			pg := math.Sqrt(ga * gb)
			if err := s.measure(ctx, s.nextIndex(), f, true, pg); err != nil {
				return err
			}
			found = true
			break
		}
		if !found {
			return nil
		}
	}
	return nil
}
