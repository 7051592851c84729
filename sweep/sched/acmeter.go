package sched

import (
	"context"
	"fmt"

	"rolloff/sweep/analysis"
)

// The AC-reading DMM (no converter): its own RMS settling, not a
// converter's, paces the readings, and its range follows the expected
// level where it has no autorange.

// ACSettler is an AC voltmeter stating its own RMS settling: a
// first-order average of the mean square of time constant SettleTauS at
// freqHz (0: not stated; the readings are then taken as settled).
type ACSettler interface {
	SettleTauS(freqHz float64) float64
}

// ACRanger is an AC voltmeter whose ranges the sweep chooses: without
// autorange, the smallest range holding the expected level.
type ACRanger interface {
	AutoRange() bool
	// RangesVrms returns the full scales, ascending, and how far past
	// full scale a range reads (a multiple, at least 1).
	RangesVrms() (ranges []float64, headroom float64)
}

// acRangeMargin is the headroom kept over the expected level when the
// AC range is chosen from it.
const acRangeMargin = 1.25

// acTau returns the AC meter's settling time constant at freqHz.
func (s *sweeper) acTau(freqHz float64) float64 {
	if st, ok := s.inst.ACVoltmeter.(ACSettler); ok {
		return st.SettleTauS(freqHz)
	}
	return 0
}

// acRange returns the AC range to configure for an expected level
// (expectVrms, 0: unknown): 0 (autorange) where the meter has it or does
// not say; else the smallest range holding the level with a margin, not
// under the range an overload moved up to; unknown, the bench's range
// or the highest.
func (s *sweeper) acRange(expectVrms float64) float64 {
	ar, ok := s.inst.ACVoltmeter.(ACRanger)
	if !ok || ar.AutoRange() {
		return 0
	}
	rs, head := ar.RangesVrms()
	if len(rs) == 0 {
		return 0
	}
	i := len(rs) - 1
	if expectVrms > 0 {
		for k, r := range rs {
			if r*max(1, head) >= expectVrms*acRangeMargin {
				i = k
				break
			}
		}
	} else if s.inst.ACRangeVrms > 0 {
		for k, r := range rs {
			if r >= s.inst.ACRangeVrms*(1-1e-9) {
				i = k
				break
			}
		}
	}
	return rs[max(i, min(s.bench.acFloor, len(rs)-1))]
}

// acOverload reacts to an overloaded AC reading: where the sweep chooses
// the range and a larger one exists, it moves up one range for the rest
// of the sweep's points at this level and the point is measured again.
func (s *sweeper) acOverload(ctx context.Context, freqHz float64) (bool, error) {
	ar, ok := s.inst.ACVoltmeter.(ACRanger)
	if !ok || ar.AutoRange() {
		return false, nil
	}
	rs, _ := ar.RangesVrms()
	cur := s.bench.acCfg.RangeVrms
	for k, r := range rs {
		if r > cur*(1+1e-9) {
			s.bench.acFloor = k
			s.bench.cfgOK = false
			s.r.logEvent(fmt.Sprintf("AC range %g → %g Vrms (overload at %s)", cur, r, analysis.FormatHz(freqHz, 4)))
			return true, s.configure(ctx, freqHz)
		}
	}
	return false, nil
}
