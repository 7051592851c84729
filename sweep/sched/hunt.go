package sched

import (
	"context"
	"fmt"
	"math"

	"rolloff/driver"
	"rolloff/sweep/analysis"
	"rolloff/sweep/plan"
	"rolloff/sweep/settle"
)

// Range hunting: a reading outside the window says more or less than a
// value. Under the converter's floor (which adds in power) it only bounds
// the output from above; saturated over range, only from below. Either
// way the next range is chosen so that the output is then known: at most
// two changes from any starting range.

const (
	// floorFraction is the output floor assumed of a true-RMS converter,
	// a fraction of full scale adding in power (about 0.1 %: from
	// memory, typical of converter data sheets).
	floorFraction = 1e-3
	// informativeFraction is the smallest fraction of full scale read as
	// a value: at the floor a reading is √2 high at most, well inside the
	// window's span (a tenfold at least), so that the range chosen from
	// it still holds the output in the window.
	informativeFraction = floorFraction
	// saturationMargin: a reading this far above the over-range threshold
	// is taken as the converter's saturation (a lower bound), not a value.
	saturationMargin = 0.1
)

// holdingRange returns the most sensitive range holding an output known
// only to be at most upperVrms (not over range, with the margin).
func (s *sweeper) holdingRange(upperVrms float64) int {
	rs, w := s.ranges(), s.inst.Converter.Window()
	for _, i := range s.ranks {
		if upperVrms <= rs[i].FullScaleVrms*w.OverFraction*(1-marginHigh) {
			return i
		}
	}
	return s.ranks[len(s.ranks)-1]
}

// reachRange returns the least sensitive range on which an output known
// only to be at least lowerVrms still reads as a value (above
// informativeFraction of full scale, with the margin), and at least one
// range above the present one: the output is then known there, however
// far above the bound it is, up to that range's saturation.
func (s *sweeper) reachRange(lowerVrms float64) int {
	rs := s.ranges()
	cur := s.bench.rangeIdx
	best := -1
	for _, i := range s.ranks {
		if rs[i].FullScaleVrms <= rs[cur].FullScaleVrms {
			continue
		}
		if best < 0 || lowerVrms >= rs[i].FullScaleVrms*informativeFraction*(1+marginLow) {
			best = i
		}
	}
	if best < 0 {
		return cur
	}
	return best
}

// saturated reports whether an over-range reading (Vrms, fraction of full
// scale; clipped when the voltmeter overloaded) is the converter's
// saturation rather than a value.
func (s *sweeper) saturated(rd driver.ConverterReading, clipped bool) bool {
	w := s.inst.Converter.Window()
	return clipped || !(rd.Vrms > 0) || rd.FractionFS >= w.OverFraction*(1+saturationMargin)
}

// guardBound is guard for an output known only as a bound (upper: at
// most vrms; else at least vrms): on the remote and operator strategies
// the range is the one where the output will be known (holdingRange,
// reachRange); the level strategy acts as guard does.
func (s *sweeper) guardBound(ctx context.Context, vrms float64, upper bool, freqHz float64, cause string) (bool, error) {
	st := s.plan.Ranging.Strategy
	why := boundWhy(upper, vrms, freqHz, cause)
	if s.inst.Converter == nil || !s.bench.rangeKnown || (st != plan.RangeRemote && st != plan.RangeOperator) {
		return s.guard(ctx, vrms, vrms/s.bench.ampVrms, freqHz, why)
	}
	i := s.reachRange(vrms)
	if upper {
		// A settled reading never falls under the floor, which adds in
		// power: the output is at most what a reading at the floor's
		// informative level would show, whatever the reading (one frozen
		// by a hold, or taken too early, shows less).
		vrms = math.Max(vrms, s.ranges()[s.bench.rangeIdx].FullScaleVrms*informativeFraction)
		i = s.holdingRange(vrms)
		why = boundWhy(upper, vrms, freqHz, cause)
	}
	if i == s.bench.rangeIdx {
		return false, nil
	}
	if st == plan.RangeRemote {
		return true, s.switchRange(ctx, i, why)
	}
	return true, s.askRange(ctx, i, why, freqHz)
}

// underFloor reports whether a reading of fraction of full scale is under
// the converter's floor: a bound, not a value.
func underFloor(fraction float64) bool { return !(fraction >= informativeFraction) }

// boundWhy is the reason given for a change made on a bound; cause, when
// not empty, says what showed it (a voltmeter's overload answer).
func boundWhy(upper bool, vrms, freqHz float64, cause string) string {
	why := fmt.Sprintf("converter saturated: at least %.4g Vrms at %s", vrms, analysis.FormatHz(freqHz, 4))
	if upper {
		why = fmt.Sprintf("reading under the converter's floor: at most %.4g Vrms at %s", vrms, analysis.FormatHz(freqHz, 4))
	}
	if cause != "" {
		why = cause + ": " + why
	}
	return why
}

// readSingle takes one reading, never averaged: the scout's, whose time
// must be known to invert the converter's response.
func (s *sweeper) readSingle(ctx context.Context) (float64, error) {
	r := s.r
	var v float64
	var err error
	if s.inst.Converter == nil || s.inst.DCVoltmeter == nil {
		ac := s.inst.ACVoltmeter
		err = r.try(ctx, "AC reading", func(ctx context.Context) (err error) { v, err = ac.ReadAC(ctx); return })
	} else {
		dvm := s.inst.DCVoltmeter
		err = r.try(ctx, "DC reading", func(ctx context.Context) (err error) { v, err = dvm.ReadDC(ctx); return })
	}
	return v, err
}

// singleS is the time of one reading not averaged, physical s.
func (s *sweeper) singleS() float64 {
	return s.bench.reading.ApertureS + s.meter().OverheadS
}

// satBound returns the lower bound on the output of a saturated reading
// taken ts after the step: the saturation level on the present range,
// or, from the converter's first-order response from its state before
// the step, the final value that reaches it by then, whichever is larger.
func (p *pointRun) satBound(ts float64) float64 {
	s := p.s
	w := s.inst.Converter.Window()
	sat := s.ranges()[s.bench.rangeIdx].FullScaleVrms * w.OverFraction
	if p.last.Vrms > sat {
		sat = p.last.Vrms
	}
	if p.tau > 0 && ts > 0 && !p.alt {
		if y1 := settle.StepTarget(p.tau, p.y0, ts, sat*sat); y1 > sat*sat {
			return math.Sqrt(y1)
		}
	}
	return sat
}

// scoutAtS returns when the scout reading ends after the step, physical
// s: at τ/2, or, on a converter with an output hold whose schedule is
// not learnt yet, after a whole hold, so that a hold under way at the
// step (one starting with the bench) cannot freeze it.
func (s *sweeper) scoutAtS(tauS float64) float64 {
	if s.inst.HoldS > 0 && !s.hold.known {
		return math.Max(tauS/2, s.inst.HoldS+s.singleS())
	}
	return tauS / 2
}
