package sched

import (
	"rolloff/sweep/event"
	"rolloff/sweep/settle"
)

// modelPointS is the model's estimate of a passband point's time: the
// readings alone (used to scale the ETA).
func (s *sweeper) modelPointS(freqHz float64) float64 {
	m := s.meter()
	rd, _ := settle.ChooseAperture(freqHz, s.tau(), rippleShare*s.plan.Settle.Tolerance, m)
	n := max(2, s.plan.Settle.Readings)
	return float64(n)*rd.TimeS(m) + s.plan.Settle.MinDwellS
}

// publishProgress publishes the run's progress.
func (s *sweeper) publishProgress() {
	r := s.r
	done := len(s.prog.pts)
	total := s.prog.nPlan + s.refinedCount() + max(s.driftCount(), s.plan.Drift.DriftChecks(s.prog.nPlan))
	remaining := 0.0
	measured := map[int]bool{}
	for _, p := range s.prog.pts {
		measured[p.Index] = true
	}
	for i, f := range s.prog.freqs {
		if !measured[i] {
			remaining += s.modelPointS(f.Hz)
		}
	}
	ratio := 1.0
	if s.prog.modelSum > 0 {
		ratio = s.prog.actSum / s.prog.modelSum
	}
	remaining *= ratio
	if n := s.refineExpected() - s.refinedCount(); n > 0 && len(s.prog.pts) > 0 {
		// The refinement still to come, at the mean measured point time
		// (its points sit on the skirts, where the dwells are).
		remaining += float64(n) * s.prog.actSum / float64(len(s.prog.pts))
	}
	eta := r.wall(remaining)
	r.mu.Lock()
	r.status.Done, r.status.Total, r.status.ETA = done, total, eta
	elapsed := r.clock.Now().Sub(r.t0)
	freq := r.status.FreqHz
	r.mu.Unlock()
	r.emit(event.Event{Type: event.TypeProgress, Progress: &event.Progress{Done: done, Total: total, FreqHz: freq, ETA: eta, Elapsed: elapsed}})
}
