package sched

import (
	"context"
	"errors"
	"math"

	"rolloff/driver"
)

// MaxBurster is a voltmeter that says how many readings one burst may
// hold (a profile's max_samples); one means no bursts.
type MaxBurster interface {
	MaxBurst() int
}

// maxBurst returns the longest burst v takes: its MaxBurst, or no limit
// for a driver.BurstReader that does not say, or 1.
func maxBurst(v driver.DCVoltmeter) int {
	if mb, ok := v.(MaxBurster); ok {
		return mb.MaxBurst()
	}
	if _, ok := v.(driver.BurstReader); ok {
		return math.MaxInt
	}
	return 1
}

// latencyReadings is the number of readings timed when the run opens.
const latencyReadings = 3

// measureLatency times a few single readings (output off) on a meter
// that reads one value per query, and keeps the shortest round trip less
// the aperture as the overhead every reading costs (bench.latencyS): the
// settle planner spaces and counts the readings with it.
func (s *sweeper) measureLatency(ctx context.Context) error {
	if len(s.prog.freqs) == 0 || !s.meter().Singles && s.inst.Converter != nil && s.inst.DCVoltmeter != nil {
		return nil
	}
	if err := s.configure(ctx, s.prog.freqs[0].Hz); err != nil {
		return err
	}
	r := s.r
	best := math.Inf(1)
	for k := 0; k < latencyReadings; k++ {
		t0 := r.phys()
		var err error
		if s.inst.Converter != nil && s.inst.DCVoltmeter != nil {
			dvm := s.inst.DCVoltmeter
			err = r.try(ctx, "DC reading (timing)", func(ctx context.Context) error { _, err := dvm.ReadDC(ctx); return err })
		} else {
			ac := s.inst.ACVoltmeter
			err = r.try(ctx, "AC reading (timing)", func(ctx context.Context) error { _, err := ac.ReadAC(ctx); return err })
		}
		if err != nil && !errors.Is(err, driver.ErrOverload) && !errors.Is(err, driver.ErrNegativeOverload) {
			return err
		}
		best = math.Min(best, r.phys()-t0)
	}
	s.bench.latencyS = math.Max(0, best-s.bench.reading.ApertureS)
	s.bench.cfgOK = false // configure again with the overhead known
	r.log.Debug().Float64("latency_s", s.bench.latencyS).Msg("voltmeter query timed")
	return nil
}
