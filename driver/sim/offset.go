package sim

import (
	"context"
	"math"

	"rolloff/driver/sim/model"
	"rolloff/driver/sim/scpiserver"
)

// maxOffsetV bounds VOLTage:OFFSet, volts into the load setting.
const maxOffsetV = 10

// offsetApplyCommands registers the DC offset and the apply-style command
// that sets frequency, amplitude and offset at once:
//
//	[SOURce[1]:]VOLTage:OFFSet <NRf>[V]          and ?
//	APPLy:SINusoid [<freq>[,<amplitude>[,<offset>]]]
//
// APPLy selects a sine and takes the amplitude in the VOLTage:UNIT in
// force; it leaves the output state alone. The offset only adds to the
// recorded DUT input peak (√(Vac² + Vdc²)): the DUT model is AC-coupled.
func (b *Bench) offsetApplyCommands(d *scpiserver.Device) {
	gc := &b.cfg.Generator
	offset := func(c *scpiserver.Call, i int) (float64, error) {
		v, err := c.Float(i, "V", nil)
		if err != nil {
			return 0, err
		}
		if math.Abs(v) > maxOffsetV {
			return 0, scpiserver.Errorf(scpiserver.DataOutOfRange, "%g V offset not in ±%d", v, maxOffsetV)
		}
		return v, nil
	}
	d.MustHandle("[SOURce[1]:]VOLTage:OFFSet", func(_ context.Context, c *scpiserver.Call) (string, error) {
		if err := c.Arity(1, 1); err != nil {
			return "", err
		}
		v, err := offset(c, 0)
		if err != nil {
			return "", err
		}
		b.mu.Lock()
		defer b.mu.Unlock()
		b.gen.offsetV = v
		b.applyLocked(b.now())
		return "", nil
	})
	d.MustHandle("[SOURce[1]:]VOLTage:OFFSet?", func(_ context.Context, c *scpiserver.Call) (string, error) {
		b.mu.Lock()
		defer b.mu.Unlock()
		return scpiserver.NR3(b.gen.offsetV), c.Arity(0, 0)
	})
	d.MustHandle("APPLy:SINusoid", func(_ context.Context, c *scpiserver.Call) (string, error) {
		if err := c.Arity(0, 3); err != nil {
			return "", err
		}
		b.mu.Lock()
		defer b.mu.Unlock()
		g := b.gen
		g.shape = model.Sine
		if len(c.Args) > 0 {
			f, err := c.Float(0, "HZ", nil)
			if err != nil {
				return "", err
			}
			if f < gc.MinFreqHz || f > gc.MaxFreqHz {
				return "", scpiserver.Errorf(scpiserver.DataOutOfRange, "%g Hz not in %g..%g", f, gc.MinFreqHz, gc.MaxFreqHz)
			}
			g.freqHz = f
		}
		if len(c.Args) > 1 {
			a, err := c.Float(1, "", nil)
			if err != nil {
				return "", err
			}
			ref := 0.0
			if g.unit == unitDBm {
				if ref, err = b.dbmRefLocked(); err != nil {
					return "", err
				}
			}
			vrms := toVrms(a, g.unit, g.shape, ref)
			if !(vrms >= gc.MinVrms*(1-1e-12) && vrms <= gc.MaxVrms*(1+1e-12)) {
				return "", scpiserver.Errorf(scpiserver.DataOutOfRange, "%g Vrms not in %g..%g", vrms, gc.MinVrms, gc.MaxVrms)
			}
			g.vrms = math.Min(math.Max(vrms, gc.MinVrms), gc.MaxVrms)
		}
		if len(c.Args) > 2 {
			v, err := offset(c, 2)
			if err != nil {
				return "", err
			}
			g.offsetV = v
		}
		b.gen = g
		b.applyLocked(b.now())
		return "", nil
	})
}
