package sched

import (
	"context"
	"errors"
	"fmt"
	"math"

	"rolloff/driver"
	"rolloff/sweep/settle"
)

// The instruments as the sweep drives them: the converter's ranges, the
// generator's output and amplitude, the voltmeter's readings and
// configuration (their state is benchState).

// ranges returns the converter's ranges.
func (s *sweeper) ranges() []driver.Range { return s.inst.Converter.Ranges() }

// tau returns the time constant of the converter's present range,
// physical seconds (0: unknown or none).
func (s *sweeper) tau() float64 {
	if s.inst.Converter == nil && s.inst.ACVoltmeter != nil {
		return s.acTau(s.bench.freqHz) // the AC meter's own settling
	}
	if s.inst.Converter == nil || !s.bench.rangeKnown {
		return 0
	}
	if e, ok := s.taus.estimate(s.bench.rangeIdx); ok && e.Confident() {
		return e.TauS // the range's, as its approaches showed it
	}
	return s.ranges()[s.bench.rangeIdx].TimeConstantS
}

// rangeName returns the name of range i ("" when there is none).
func (s *sweeper) rangeName(i int) string {
	if s.inst.Converter == nil || i < 0 || i >= len(s.ranges()) {
		return ""
	}
	return s.ranges()[i].Name
}

// ampBounds returns the amplitude window of the level strategy.
func (s *sweeper) ampBounds() (lo, hi float64) {
	lv := s.plan.Level
	lo, hi = lv.MinVrms, lv.MaxVrms
	if hi <= 0 {
		hi = lv.Vrms
	}
	if lo <= 0 {
		lo = lv.Vrms
	}
	lim := s.inst.Limits
	if lim.MaxVrms > 0 {
		hi = math.Min(hi, lim.MaxVrms)
	}
	if lim.MinVrms > 0 {
		lo = math.Max(lo, lim.MinVrms)
	}
	return lo, hi
}

// setOutput switches the generator output, keeping the converter model.
func (s *sweeper) setOutput(ctx context.Context, on bool, expectVrms float64) error {
	if s.bench.outputOn == on {
		return nil
	}
	g := s.inst.Generator
	if on && !s.bench.ampSet {
		return errors.New("sched: output on with the amplitude unset")
	}
	what := "generator output off"
	if on {
		what = "generator output on"
	}
	if err := s.r.try(ctx, what, func(ctx context.Context) error { return g.SetOutput(ctx, on) }); err != nil {
		return err
	}
	s.bench.outputOn = on
	if on {
		s.conv.step(s.r.phys(), s.tau(), expectVrms*expectVrms)
	} else {
		s.conv.step(s.r.phys(), s.tau(), 0)
	}
	return nil
}

func (s *sweeper) setAmplitude(ctx context.Context, vrms float64) error {
	if s.bench.ampSet && s.bench.ampVrms == vrms {
		return nil
	}
	if lim := s.inst.Limits; lim.MaxVrms > 0 && vrms > lim.MaxVrms*(1+1e-12) {
		return fmt.Errorf("sched: amplitude %g V above the bench limit %g V", vrms, lim.MaxVrms)
	}
	g := s.inst.Generator
	if err := s.r.try(ctx, "generator amplitude", func(ctx context.Context) error { return g.SetAmplitude(ctx, vrms) }); err != nil {
		return err
	}
	s.bench.ampVrms, s.bench.ampSet = vrms, true
	s.r.mu.Lock()
	s.r.status.VinVrms = vrms
	s.r.mu.Unlock()
	return nil
}

// readOnce takes one (possibly averaged) reading: the DC output volts
// (converter) or Vrms (AC voltmeter). The readings averaged are one burst
// where the voltmeter takes one that long, else single readings, spaced
// as the reading plan says.
func (s *sweeper) readOnce(ctx context.Context) (float64, error) {
	n := max(1, s.bench.reading.Average)
	r := s.r
	if s.inst.Converter == nil || s.inst.DCVoltmeter == nil {
		ac := s.inst.ACVoltmeter
		return s.singles(ctx, n, "AC reading", ac.ReadAC)
	}
	dvm := s.inst.DCVoltmeter
	if br, ok := dvm.(driver.BurstReader); ok && n > 1 && n <= maxBurst(dvm) {
		var vs []float64
		err := r.try(ctx, "DC burst", func(ctx context.Context) (err error) { vs, err = br.ReadBurst(ctx, n); return })
		if err != nil {
			return 0, err
		}
		if len(vs) == 0 {
			return 0, fmt.Errorf("sched: empty burst: %w", driver.ErrMalformed)
		}
		var sum float64
		for _, v := range vs {
			sum += v
		}
		return sum / float64(len(vs)), nil
	}
	return s.singles(ctx, n, "DC reading", dvm.ReadDC)
}

// singles averages n single readings of read, each started
// bench.reading.SpacingS after the one before when that is set. Each
// reading's time is the moment its query went out plus half the
// aperture; where there are enough of them the ripple is fitted out at
// those times (settle.FitMean), so a host that wakes late leaves no
// ripple on the value, else they are averaged.
func (s *sweeper) singles(ctx context.Context, n int, what string, read func(context.Context) (float64, error)) (float64, error) {
	r := s.r
	rd := s.bench.reading
	sp := rd.SpacingS
	t0 := r.phys()
	ts := make([]float64, 0, n)
	vs := make([]float64, 0, n)
	for k := 0; k < n; k++ {
		if k > 0 && sp > 0 {
			if err := r.sleepUntil(ctx, t0+float64(k)*sp); err != nil {
				return 0, err
			}
		}
		var v, tS float64
		err := r.try(ctx, what, func(ctx context.Context) (err error) {
			tS = r.phys() + rd.ApertureS/2
			v, err = read(ctx)
			return
		})
		if err != nil {
			return 0, err
		}
		ts, vs = append(ts, tS), append(vs, v)
	}
	rippleHz := 0.0 // unknown: FitMean returns the mean
	if s.bench.freqSet {
		rippleHz = 2 * s.bench.freqHz
	}
	v, _ := settle.FitMean(ts, vs, rippleHz, settle.FitHarmonics)
	return v, nil
}

func (s *sweeper) meter() settle.Meter {
	m := s.inst.Meter
	if m.Validate() != nil {
		line := s.inst.LineHz
		if line <= 0 {
			line = 50
		}
		m = settle.NPLCMeter([]float64{1, 10}, line, 0)
	}
	if s.bench.latencyS > m.OverheadS {
		m.OverheadS = s.bench.latencyS
	}
	if mb, ok := s.inst.DCVoltmeter.(MaxBurster); ok && s.inst.Converter != nil && mb.MaxBurst() <= 1 {
		m.Singles = true // a meter saying it takes no bursts
	}
	return m
}

// configure chooses the aperture for freqHz and configures the voltmeter
// when it changes.
func (s *sweeper) configure(ctx context.Context, freqHz float64) error {
	m := s.meter()
	tau := s.tau()
	rd, err := settle.ChooseAperture(freqHz, tau, rippleShare*s.plan.Settle.Tolerance, m)
	if err != nil && !errors.Is(err, settle.ErrNoAperture) {
		return err
	}
	if s.inst.Converter == nil && tau <= 0 && m.Fixed {
		// An AC meter stating no settling: its reading is its own RMS.
		rd = settle.Reading{ApertureS: m.Shortest(), Average: 1}
	}
	ap := driver.Aperture{Seconds: rd.ApertureS}
	switch {
	case m.Fixed:
		ap = driver.Aperture{} // the instrument's own
	case m.LineHz > 0:
		ap = driver.Aperture{NPLC: math.Round(rd.ApertureS*m.LineHz*1e9) / 1e9}
	}
	s.bench.reading = rd
	if s.inst.Converter != nil && s.inst.DCVoltmeter != nil {
		rangeV := s.inst.DCRangeV
		if rangeV <= 0 {
			w := s.inst.Converter.Window()
			rangeV = w.DCFullScaleV * math.Max(1, w.OverFraction)
		}
		cfg := driver.DCConfig{RangeV: rangeV, Aperture: ap}
		if s.bench.cfgOK && cfg == s.bench.dcCfg {
			return nil
		}
		dvm := s.inst.DCVoltmeter
		if err := s.r.try(ctx, "voltmeter configure", func(ctx context.Context) error { return dvm.ConfigureDC(ctx, cfg) }); err != nil {
			return err
		}
		s.bench.dcCfg, s.bench.cfgOK = cfg, true
		return nil
	}
	cfg := driver.ACConfig{Aperture: ap, RangeVrms: s.acRange(s.bench.acExpect)}
	if s.bench.cfgOK && cfg == s.bench.acCfg {
		return nil
	}
	ac := s.inst.ACVoltmeter
	if err := s.r.try(ctx, "voltmeter configure", func(ctx context.Context) error { return ac.ConfigureAC(ctx, cfg) }); err != nil {
		return err
	}
	s.bench.acCfg, s.bench.cfgOK = cfg, true
	return nil
}

// scale turns a reading into Vrms and a window status on the current range.
func (s *sweeper) scaleReading(v float64) (driver.ConverterReading, error) {
	if s.inst.Converter == nil || s.inst.DCVoltmeter == nil {
		return driver.ConverterReading{Vrms: v, Status: driver.InSpec}, nil
	}
	return s.inst.Converter.Scale(s.bench.rangeIdx, v)
}
