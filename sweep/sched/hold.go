package sched

import (
	"context"
	"errors"
	"fmt"
	"math"

	"rolloff/driver"
	"rolloff/sweep/settle"
)

// The converter output hold: see the package documentation.

// holdGuard decides how the readings of a point avoid being fooled by
// the converter's output hold: a hold freezes the output at its start for
// HoldS, so a reading at t may show the output of any time in
// [t − HoldS, t].
//
// After a step that needs a dwell, a probe reading is taken at probe (s
// after the step), when the model puts the output within 1.5·Tol of the
// new value; the window after the dwell must then have moved away from
// the probe as the model says it should. If instead it still reads what
// the probe read, a hold that began before the probe covers both and the
// window is taken again after the hold (see holdSuspect). A hold that
// begins after the probe freezes a value within 1.5·Tol, no worse than
// the tolerance band the readings must agree in.
//
// After a step within the tolerance (no dwell), a frozen value is one of
// the previous points' values: tOK is the time since which the output has
// stayed within the tolerance of vRef, and while the new value stays
// within Tol/2 of vRef nothing is waited for; when it drifts further the
// readings wait until a hold that began before the drift is over.
//
// It returns the earliest window time and the probe time (−1: none), both
// relative to tStep.
func (s *sweeper) holdGuard(tStep, dwell, v1 float64, known bool) (notBefore, probe float64) {
	if s.inst.HoldS <= 0 {
		return dwell, -1
	}
	tol := s.plan.Settle.Tolerance
	switch {
	case dwell > s.plan.Settle.MinDwellS || !known || !(s.hold.vRef > 0):
		s.hold.tOK, s.hold.vRef = tStep+dwell, v1
		readS := s.bench.reading.TimeS(s.meter())
		// The probe ends before the window's first reading begins: a
		// reading spanning both (spaced single readings, long) would make
		// them agree and fake a hold.
		if p := dwell - s.tau()*math.Log(1.5); p > readS && p < dwell && s.tau()*math.Log(1.5) >= readS {
			return dwell, p
		}
		return dwell, -1
	case s.hold.known:
		// The schedule is known: holdAhead keeps the window out of holds.
		return dwell, -1
	case math.Abs(v1/s.hold.vRef-1)+s.pred.err(s.pred.refining) > tol/2:
		s.hold.tOK, s.hold.vRef = tStep, v1
	}
	return math.Max(dwell, s.hold.tOK+s.inst.HoldS-tStep), -1
}

// holdSuspect reports whether the accepted window (mean wV, first reading
// at wTS) reads what the probe (pV at pTS) read although the first-order
// model from the state before the step (y0, heading for v1) says the
// output moved by at least Tol/4 in between (and the readings moved by
// less than a third of that): then both were taken in one hold.
func holdSuspect(tau, y0, v1, pTS, pV, wTS, wV, tol float64) bool {
	if !(tau > 0) || !(v1 > 0) || !(pV > 0) || !(wV > 0) {
		return false
	}
	e := settle.Residual(tau, math.Sqrt(y0), v1, pTS) - settle.Residual(tau, math.Sqrt(y0), v1, wTS)
	if e < tol/4 {
		return false
	}
	return math.Abs(wV-pV)/wV < e/3
}

// observeDwell, while the converter's hold schedule is unknown, reads
// during the dwell (the voltmeter is idle then, so it costs no time) until
// the physical time until, and learns the schedule from a hold seen in
// the readings: where the first-order model from the state before the
// step (y0, heading for v1, or rising from zero) says consecutive
// readings must differ by at least Tol/2, three that agree within a
// quarter of that were frozen.
func (s *sweeper) observeDwell(ctx context.Context, tStep, until, y0, v1 float64, known bool) error {
	r := s.r
	tau := s.tau()
	readS := s.bench.reading.TimeS(s.meter())
	if s.hold.known || s.inst.HoldS <= 0 || s.inst.HoldIntervalS <= 0 || tau <= 0 || s.inst.Converter == nil || s.inst.DCVoltmeter == nil {
		return nil
	}
	if !known {
		if y0 > 0 {
			return nil // an unknown target from a known state: no shape to compare
		}
		v1 = 1 // from zero the relative shape does not depend on the target
	}
	y1 := v1 * v1
	model := func(t float64) float64 { return math.Sqrt(math.Max(0, y1+(y0-y1)*math.Exp(-t/tau))) }
	tol := s.plan.Settle.Tolerance
	type rd struct{ t0, t1, v float64 }
	var prev []rd
	frozen := 0
	for r.phys()+readS < until {
		if err := r.pausedErr(ctx); err != nil {
			return err
		}
		t0 := r.phys()
		v, err := s.readOnce(ctx)
		t1 := r.phys()
		if err != nil {
			if errors.Is(err, driver.ErrOverload) || errors.Is(err, driver.ErrNegativeOverload) {
				return nil
			}
			return err
		}
		cur := rd{t0 - tStep, t1 - tStep, v}
		if n := len(prev); n > 0 {
			p := prev[n-1]
			ma, mb := model((p.t0+p.t1)/2), model((cur.t0+cur.t1)/2)
			exp := math.Abs(mb-ma) / math.Max(mb, 1e-300)
			obs := math.Abs(cur.v-p.v) / math.Max(math.Abs(cur.v), 1e-300)
			switch {
			case exp >= tol/2 && obs < exp/4:
				frozen++
			case exp >= tol/2:
				frozen = 0
			}
			if frozen == 2 && n >= 3 {
				// prev[n-2] is the first reading of the frozen run: the
				// hold began before its end, and after the start of the
				// last reading that moved (with a reading of margin, for
				// one the hold began inside).
				first, before := prev[n-2], prev[n-3]
				s.learnHold(tStep+before.t0-readS, tStep+first.t1)
				r.logEvent(fmt.Sprintf("converter output hold seen at %.3f s of the run; its schedule (every %g s) is now avoided", tStep+first.t0, s.inst.HoldIntervalS))
				return nil
			}
		}
		prev = append(prev, cur)
	}
	return nil
}

// learnHold records that a hold began between lo and hi (physical s).
func (s *sweeper) learnHold(lo, hi float64) { s.hold.learn(lo, hi, s.inst.HoldIntervalS) }

// holdAhead returns the end (physical s) of a hold of the learnt schedule
// that may overlap [t0, t1], or 0.
func (s *sweeper) holdAhead(t0, t1 float64) float64 {
	return s.hold.ahead(t0, t1, s.inst.HoldIntervalS, s.inst.HoldS)
}

// learn records that a hold began between lo and hi (physical s): holds
// recur every ivS, so later ones are expected in the same window shifted
// by whole intervals. A later detection narrows the window to the
// overlap of both.
func (h *holdSchedule) learn(lo, hi, ivS float64) {
	iv := ivS
	if iv <= 0 || hi < lo {
		return
	}
	if h.known {
		// Bring the known window next to the new one and intersect.
		k := math.Round((lo - h.lo) / iv)
		klo, khi := h.lo+k*iv, h.hi+k*iv
		if nlo, nhi := math.Max(lo, klo), math.Min(hi, khi); nlo <= nhi {
			lo, hi = nlo, nhi
		}
	}
	h.lo, h.hi, h.known = lo, hi, true
}

// ahead returns the end (physical s) of a hold of holdS, recurring every
// ivS, that may overlap [t0, t1], or 0. The schedule's uncertainty grows
// by 0.1 % of the time since it was learnt (an instrument's clock).
func (h *holdSchedule) ahead(t0, t1, ivS, holdS float64) float64 {
	iv, hs := ivS, holdS
	if !h.known || iv <= 0 || hs <= 0 {
		return 0
	}
	k := math.Floor((t0 - h.hi) / iv)
	for j := k; j <= k+2; j++ {
		slack := 1e-3 * math.Abs(j*iv)
		start0, start1 := h.lo+j*iv-slack, h.hi+j*iv+slack
		end := start1 + hs
		if start0 < t1 && end > t0 {
			return end
		}
	}
	return 0
}
