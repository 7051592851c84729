package instr

import (
	"context"
	"fmt"

	"rolloff/driver"
	"rolloff/driver/profile"
	"rolloff/driver/scpi"
)

// meter is the state the DC and AC functions of a DMM share: the session
// and the sample count last set (0 until set).
type meter struct {
	link
	mu    lock
	p     *profile.DMM
	count int
}

func (m *meter) setup(ctx context.Context) error {
	return m.sendAll(ctx, m.p.T.Init)
}

// setCount makes the next read return n readings.
func (m *meter) setCount(ctx context.Context, n int) error {
	if m.count == n || m.p.T.SetSampleCount == nil {
		return nil
	}
	m.count = 0
	if err := m.send(ctx, m.p.T.SetSampleCount, scpi.Int("count", n)); err != nil {
		return err
	}
	m.count = n
	return nil
}

// checkAperture says why a cannot be set with the profile's templates
// (ErrOutOfRange), before anything is sent.
func (m *meter) checkAperture(a driver.Aperture, nplcs []float64, minS, maxS float64, tNPLC, tAp *scpi.Seq) error {
	switch {
	case a.NPLC > 0 && a.Seconds > 0:
		return fmt.Errorf("%s: aperture %g NPLC and %g s: give one of the two: %w", m.role, a.NPLC, a.Seconds, driver.ErrOutOfRange)
	case a.NPLC > 0:
		if tNPLC == nil || !containsF(nplcs, a.NPLC) {
			return outOfRange(m.role, "aperture (NPLC)", a.NPLC, fmt.Sprintf("one of %v (profile %s)", nplcs, m.p.File))
		}
	case a.Seconds > 0:
		if tAp == nil || a.Seconds < minS || a.Seconds > maxS {
			return outOfRange(m.role, "aperture (s)", a.Seconds, fmt.Sprintf("%g to %g s (profile %s)", minS, maxS, m.p.File))
		}
	case a.NPLC < 0 || a.Seconds < 0:
		return outOfRange(m.role, "aperture", a.NPLC+a.Seconds, "a positive NPLC or seconds")
	}
	return nil
}

// aperture sends the integration time through whichever template the
// profile has for it.
func (m *meter) aperture(ctx context.Context, a driver.Aperture, nplcs []float64, minS, maxS float64, tNPLC, tAp *scpi.Seq) error {
	if err := m.checkAperture(a, nplcs, minS, maxS, tNPLC, tAp); err != nil {
		return err
	}
	switch {
	case a.NPLC > 0:
		arg, _ := m.num("nplc", a.NPLC)
		return m.send(ctx, tNPLC, arg)
	case a.Seconds > 0:
		arg, _ := m.num("aperture_s", a.Seconds)
		return m.send(ctx, tAp, arg)
	}
	return nil // keep the instrument's integration time
}

func containsF(v []float64, x float64) bool {
	for _, y := range v {
		if y == x {
			return true
		}
	}
	return false
}

// DCVoltmeter is a DMM's DC voltage function, the voltmeter on an analog
// converter's output.
type DCVoltmeter struct {
	meter
	rangeV float64
}

var (
	_ driver.DCVoltmeter    = (*DCVoltmeter)(nil)
	_ driver.BurstReader    = (*DCVoltmeter)(nil)
	_ driver.LineFrequency  = (*DCVoltmeter)(nil)
	_ driver.DCAccuracySpec = (*DCVoltmeter)(nil)
	_ driver.Identifier     = (*DCVoltmeter)(nil)
)

// NewDCVoltmeter returns the DC voltmeter role of the DMM reached by sess.
// Nothing is sent.
func NewDCVoltmeter(sess *scpi.Session, p *profile.DMM) (*DCVoltmeter, error) {
	if sess == nil || p == nil {
		return nil, fmt.Errorf("instr: NewDCVoltmeter: nil session or profile")
	}
	return &DCVoltmeter{meter: meter{link: link{role: "voltmeter", sess: sess, checkErrors: p.CheckErrors, dialect: p.Dialect}, mu: newLock(), p: p}}, nil
}

// Setup sends the profile's init commands.
func (v *DCVoltmeter) Setup(ctx context.Context) error {
	if err := v.mu.acquire(ctx); err != nil {
		return fmt.Errorf("voltmeter: %w", err)
	}
	defer v.mu.release()
	return v.setup(ctx)
}

// ConfigureDC selects DC volts on the smallest range holding cfg.RangeV
// and sets the aperture. RangeV 0 selects autorange where the profile has
// dc.set_auto_range, and is refused otherwise.
func (v *DCVoltmeter) ConfigureDC(ctx context.Context, cfg driver.DCConfig) error {
	dc := &v.p.DC
	t := &v.p.T
	auto := cfg.RangeV == 0 && t.DCSetAutoRange != nil
	r, ok := profile.PickRange(dc.RangesV, cfg.RangeV, v.p.RangeHeadroom)
	if !auto && (!ok || !(cfg.RangeV > 0)) {
		return outOfRange("voltmeter", "DC range (V)", cfg.RangeV, fmt.Sprintf("more than 0, at most %g V (ranges %v, profile %s)", dc.RangesV[len(dc.RangesV)-1]*v.p.RangeHeadroom, dc.RangesV, v.p.File))
	}
	if err := v.checkAperture(cfg.Aperture, dc.NPLC, dc.MinApertureS, dc.MaxApertureS, t.DCSetNPLC, t.DCSetAperture); err != nil {
		return err
	}
	if err := v.mu.acquire(ctx); err != nil {
		return fmt.Errorf("voltmeter: %w", err)
	}
	defer v.mu.release()
	v.rangeV = 0
	if t.DCConfigure != nil {
		if err := v.send(ctx, t.DCConfigure); err != nil {
			return err
		}
	}
	v.count = 0 // CONFigure resets the trigger and sample settings (SCPI-1999 CONFigure)
	if auto {
		if err := v.send(ctx, t.DCSetAutoRange); err != nil {
			return err
		}
		r = 0
	} else if t.DCSetRange != nil {
		arg, sent := v.num("range_v", r)
		if err := v.send(ctx, t.DCSetRange, arg); err != nil {
			return err
		}
		r = sent
	}
	if err := v.aperture(ctx, cfg.Aperture, dc.NPLC, dc.MinApertureS, dc.MaxApertureS, t.DCSetNPLC, t.DCSetAperture); err != nil {
		return err
	}
	if err := v.setCount(ctx, 1); err != nil {
		return err
	}
	v.rangeV = r
	return v.afterSettings(ctx)
}

// readArgs returns the arguments a reading takes: the range, for a meter
// that is given it with each reading.
func (m *meter) readArgs(s *scpi.Seq, name string, rangeV float64) []scpi.Arg {
	if !s.Has(name) {
		return nil
	}
	arg, _ := m.num(name, rangeV)
	return []scpi.Arg{arg}
}

// RangeV returns the DC range configured, volts (0 before ConfigureDC and
// on autorange).
func (v *DCVoltmeter) RangeV() float64 { return v.rangeV }

// ReadDC takes one reading, volts. An overload answer wraps
// driver.ErrOverload.
func (v *DCVoltmeter) ReadDC(ctx context.Context) (float64, error) {
	if err := v.mu.acquire(ctx); err != nil {
		return 0, fmt.Errorf("voltmeter: %w", err)
	}
	defer v.mu.release()
	if err := v.setCount(ctx, 1); err != nil {
		return 0, err
	}
	return v.queryFloat(ctx, v.p.T.DCRead, v.readArgs(v.p.T.DCRead, "range_v", v.rangeV)...)
}

// ReadBurst takes n readings back to back, 1 ≤ n ≤ the profile's
// max_samples.
func (v *DCVoltmeter) ReadBurst(ctx context.Context, n int) ([]float64, error) {
	if n < 1 || n > v.p.MaxSamples {
		return nil, outOfRange("voltmeter", "burst length", float64(n), fmt.Sprintf("1 to %d (profile %s max_samples)", v.p.MaxSamples, v.p.File))
	}
	if err := v.mu.acquire(ctx); err != nil {
		return nil, fmt.Errorf("voltmeter: %w", err)
	}
	defer v.mu.release()
	if err := v.setCount(ctx, n); err != nil {
		return nil, err
	}
	vals, err := v.queryFloats(ctx, v.p.T.DCRead, v.readArgs(v.p.T.DCRead, "range_v", v.rangeV)...)
	if err != nil {
		return nil, err
	}
	if len(vals) != n {
		return nil, fmt.Errorf("voltmeter: %s: %d readings, want %d: %w", v.p.T.DCRead.Key(), len(vals), n, driver.ErrMalformed)
	}
	return vals, nil
}

// LineHz returns the power-line frequency of the profile.
func (v *DCVoltmeter) LineHz() float64 { return v.p.LineHz }

// DCAccuracyV returns the half-width of the DC specification, volts.
func (v *DCVoltmeter) DCAccuracyV(readingV, rangeV float64) float64 {
	return v.p.DCAccuracyV(readingV, rangeV)
}

// ACVoltmeter is a DMM's AC (true-RMS) voltage function.
type ACVoltmeter struct {
	meter
	rangeVrms float64 // the range configured, 0 on autorange
}

var (
	_ driver.ACVoltmeter   = (*ACVoltmeter)(nil)
	_ driver.LineFrequency = (*ACVoltmeter)(nil)
	_ driver.Identifier    = (*ACVoltmeter)(nil)
)

// NewACVoltmeter returns the AC voltmeter role of the DMM reached by sess;
// the profile must have an [ac] table. Nothing is sent.
func NewACVoltmeter(sess *scpi.Session, p *profile.DMM) (*ACVoltmeter, error) {
	if sess == nil || p == nil {
		return nil, fmt.Errorf("instr: NewACVoltmeter: nil session or profile")
	}
	if p.AC == nil {
		return nil, fmt.Errorf("instr: NewACVoltmeter: profile %s has no [ac] table", p.File)
	}
	return &ACVoltmeter{meter: meter{link: link{role: "dmm", sess: sess, checkErrors: p.CheckErrors, dialect: p.Dialect}, mu: newLock(), p: p}}, nil
}

// SetRole renames the role in messages (e.g. "vin").
func (a *ACVoltmeter) SetRole(role string) { a.role = role }

// Setup sends the profile's init commands.
func (a *ACVoltmeter) Setup(ctx context.Context) error {
	if err := a.mu.acquire(ctx); err != nil {
		return fmt.Errorf("%s: %w", a.role, err)
	}
	defer a.mu.release()
	return a.setup(ctx)
}

// ConfigureAC selects AC volts on the smallest range holding
// cfg.RangeVrms (0: autorange, where the profile has ac.set_auto_range)
// and sets the aperture where the profile allows it.
func (a *ACVoltmeter) ConfigureAC(ctx context.Context, cfg driver.ACConfig) error {
	ac := a.p.AC
	t := &a.p.T
	auto := cfg.RangeVrms == 0 && t.ACSetAutoRange != nil
	r, ok := profile.PickRange(ac.RangesVrms, cfg.RangeVrms, a.p.RangeHeadroom)
	if !auto && (!ok || !(cfg.RangeVrms > 0)) {
		return outOfRange(a.role, "AC range (Vrms)", cfg.RangeVrms, fmt.Sprintf("more than 0, at most %g Vrms (ranges %v, profile %s)", ac.RangesVrms[len(ac.RangesVrms)-1]*a.p.RangeHeadroom, ac.RangesVrms, a.p.File))
	}
	if err := a.checkAperture(cfg.Aperture, ac.NPLC, ac.MinApertureS, ac.MaxApertureS, t.ACSetNPLC, t.ACSetAperture); err != nil {
		return err
	}
	if err := a.mu.acquire(ctx); err != nil {
		return fmt.Errorf("%s: %w", a.role, err)
	}
	defer a.mu.release()
	if t.ACConfigure != nil {
		if err := a.send(ctx, t.ACConfigure); err != nil {
			return err
		}
	}
	a.count = 0
	a.rangeVrms = 0
	if auto {
		if err := a.send(ctx, t.ACSetAutoRange); err != nil {
			return err
		}
		r = 0
	} else if t.ACSetRange != nil {
		arg, sent := a.num("range_vrms", r)
		if err := a.send(ctx, t.ACSetRange, arg); err != nil {
			return err
		}
		r = sent
	}
	if err := a.aperture(ctx, cfg.Aperture, ac.NPLC, ac.MinApertureS, ac.MaxApertureS, t.ACSetNPLC, t.ACSetAperture); err != nil {
		return err
	}
	if err := a.setCount(ctx, 1); err != nil {
		return err
	}
	a.rangeVrms = r
	return a.afterSettings(ctx)
}

// ReadAC takes one reading, Vrms.
func (a *ACVoltmeter) ReadAC(ctx context.Context) (float64, error) {
	if err := a.mu.acquire(ctx); err != nil {
		return 0, fmt.Errorf("%s: %w", a.role, err)
	}
	defer a.mu.release()
	if err := a.setCount(ctx, 1); err != nil {
		return 0, err
	}
	return a.queryFloat(ctx, a.p.T.ACRead, a.readArgs(a.p.T.ACRead, "range_vrms", a.rangeVrms)...)
}

// LineHz returns the power-line frequency of the profile.
func (a *ACVoltmeter) LineHz() float64 { return a.p.LineHz }
