package sim

import (
	"context"
	"math"

	"rolloff/driver/sim/model"
	"rolloff/driver/sim/scpiserver"
)

// Amplitude units of VOLTage:UNIT.
type ampUnit int

const (
	unitVrms ampUnit = iota
	unitVpp
	unitDBm
)

var unitNames = []string{"VRMS", "VPP", "DBM"}

func unitByName(s string) (ampUnit, bool) {
	for i, n := range unitNames {
		if n == s {
			return ampUnit(i), true
		}
	}
	return 0, false
}

// OUTPut:LOAD limits, Ω.
const (
	minLoadOhm = 1
	maxLoadOhm = 10000
)

// dBm reference conventions (GeneratorConfig.DBmReference).
const (
	DBmFixed = "fixed" // dBm refer to dbm_fixed_ohm whatever the load setting
	DBmLoad  = "load"  // dBm refer to the OUTPut:LOAD setting (refused at INFinity)
)

// genState is the generator's settings.
type genState struct {
	freqHz  float64
	vrms    float64 // amplitude setting, Vrms of the waveform into loadOhm
	unit    ampUnit
	shape   model.Shape
	on      bool
	loadOhm float64 // 0: INFinity
	offsetV float64 // DC offset setting, volts into loadOhm
}

func resetGen(c *GeneratorConfig) genState {
	u, _ := unitByName(c.ResetUnit)
	g := genState{freqHz: c.ResetFreqHz, vrms: c.ResetVrms, unit: u, shape: model.Sine, loadOhm: c.LoadOhm}
	if c.Personality == PersonalityApplyVpp {
		g.unit, g.loadOhm = unitVpp, applyVppLoad
	}
	return g
}

// dutVrms returns the voltage at the DUT input: the generator sets its
// open-circuit voltage so that the set amplitude appears across the load
// it is told about; the DUT's input impedance divides that with the
// source impedance.
func (g *genState) dutVrms(sourceOhm, inputOhm float64) float64 {
	return g.atDUT(g.vrms, sourceOhm, inputOhm)
}

// atDUT divides a voltage set into the load setting down to the DUT
// input (DC and AC alike: the impedances are resistive).
func (g *genState) atDUT(v, sourceOhm, inputOhm float64) float64 {
	emf := v
	if g.loadOhm > 0 {
		emf = v * (g.loadOhm + sourceOhm) / g.loadOhm
	}
	if inputOhm > 0 {
		return emf * inputOhm / (inputOhm + sourceOhm)
	}
	return emf
}

// toVrms converts an amplitude in unit u to Vrms for the shape: Vpp is
// twice the peak (crest factor × Vrms), dBm is power into refOhm.
func toVrms(v float64, u ampUnit, s model.Shape, refOhm float64) float64 {
	switch u {
	case unitVpp:
		return v / (2 * s.Crest())
	case unitDBm:
		return math.Sqrt(refOhm * 1e-3 * math.Pow(10, v/10))
	}
	return v
}

func fromVrms(vrms float64, u ampUnit, s model.Shape, refOhm float64) float64 {
	switch u {
	case unitVpp:
		return vrms * 2 * s.Crest()
	case unitDBm:
		return 10 * math.Log10(vrms*vrms/refOhm/1e-3)
	}
	return vrms
}

// dbmRefLocked returns the resistance DBM refers to under the configured
// convention; an error when it is the load setting and that is INFinity.
func (b *Bench) dbmRefLocked() (float64, error) {
	gc := &b.cfg.Generator
	if gc.DBmReference == DBmLoad {
		if b.gen.loadOhm == 0 {
			return 0, scpiserver.Errorf(scpiserver.SettingsConflict, "DBM with OUTPut:LOAD INFinity")
		}
		return b.gen.loadOhm, nil
	}
	return gc.DBmFixedOhm, nil
}

// PeakDUTInputVrms returns the largest RMS voltage the generator has put
// into the DUT input since New or the last ResetPeak, computed from the
// generator's own state (level, unit, dBm convention, load setting,
// source and DUT impedances, DC offset: √(Vac² + Vdc²)), not from what any
// controller meant to set.
func (b *Bench) PeakDUTInputVrms() float64 {
	b.mu.Lock()
	defer b.mu.Unlock()
	return b.peakVrms
}

// ResetPeak forgets the recorded peak.
func (b *Bench) ResetPeak() {
	b.mu.Lock()
	defer b.mu.Unlock()
	b.peakVrms = 0
}

// notePeakLocked records the DUT input of the current state.
func (b *Bench) notePeakLocked() {
	if !b.gen.on {
		return
	}
	gc := &b.cfg.Generator
	ac := b.gen.dutVrms(gc.SourceOhm, b.cfg.DUT.InputOhm) * b.sys.GeneratorGain(b.gen.freqHz)
	dc := b.gen.atDUT(b.gen.offsetV, gc.SourceOhm, b.cfg.DUT.InputOhm)
	if v := math.Sqrt(ac*ac + dc*dc); v > b.peakVrms {
		b.peakVrms = v
	}
}

var shapePatterns = []string{"SINusoid", "SQUare", "TRIangle"}

// generatorCommands registers the generator's command set.
func (b *Bench) generatorCommands(in *instrument) {
	in.reset = b.resetGenerator
	d := in.dev
	gc := &b.cfg.Generator
	freqSpecials := map[string]float64{"MINimum": gc.MinFreqHz, "MAXimum": gc.MaxFreqHz, "DEFault": gc.ResetFreqHz}
	setFreq := func(_ context.Context, c *scpiserver.Call) (string, error) {
		if err := c.Arity(1, 1); err != nil {
			return "", err
		}
		v, err := c.Float(0, "HZ", freqSpecials)
		if err != nil {
			return "", err
		}
		if v < gc.MinFreqHz || v > gc.MaxFreqHz {
			return "", scpiserver.Errorf(scpiserver.DataOutOfRange, "%g Hz not in %g..%g", v, gc.MinFreqHz, gc.MaxFreqHz)
		}
		b.mu.Lock()
		defer b.mu.Unlock()
		b.gen.freqHz = v
		b.applyLocked(b.now())
		return "", nil
	}
	getFreq := func(_ context.Context, c *scpiserver.Call) (string, error) {
		if err := c.Arity(0, 1); err != nil {
			return "", err
		}
		if len(c.Args) == 1 {
			v, err := c.Float(0, "", map[string]float64{"MINimum": gc.MinFreqHz, "MAXimum": gc.MaxFreqHz})
			if err != nil {
				return "", err
			}
			return scpiserver.NR3(v), nil
		}
		b.mu.Lock()
		defer b.mu.Unlock()
		return scpiserver.NR3(b.gen.freqHz), nil
	}
	d.MustHandle("[SOURce[1]:]FREQuency[:CW]", setFreq)
	d.MustHandle("[SOURce[1]:]FREQuency:FIXed", setFreq)
	d.MustHandle("[SOURce[1]:]FREQuency[:CW]?", getFreq)
	d.MustHandle("[SOURce[1]:]FREQuency:FIXed?", getFreq)

	volt := "[SOURce[1]:]VOLTage[:LEVel][:IMMediate][:AMPLitude]"
	d.MustHandle(volt, func(_ context.Context, c *scpiserver.Call) (string, error) {
		if err := c.Arity(1, 1); err != nil {
			return "", err
		}
		b.mu.Lock()
		defer b.mu.Unlock()
		g := &b.gen
		n, err := c.Number(0, scpiserver.NumSpec{
			Unit:     "V",
			AltUnits: []string{"VPP", "VRMS", "DBM"},
			Specials: map[string]float64{"MINimum": gc.MinVrms, "MAXimum": gc.MaxVrms, "DEFault": gc.ResetVrms},
		})
		if err != nil {
			return "", err
		}
		vrms := n.V
		if n.Special == "" {
			u := g.unit
			switch n.Unit {
			case "V":
				if u == unitDBm {
					return "", scpiserver.Errorf(scpiserver.InvalidSuffix, "V with VOLT:UNIT DBM")
				}
			case "":
			default:
				u, _ = unitByName(n.Unit)
			}
			ref := 0.0
			if u == unitDBm {
				if ref, err = b.dbmRefLocked(); err != nil {
					return "", err
				}
			}
			vrms = toVrms(n.V, u, g.shape, ref)
		}
		// A little slack so that a limit given in another unit and
		// converted back is not refused by rounding.
		if !(vrms >= gc.MinVrms*(1-1e-12) && vrms <= gc.MaxVrms*(1+1e-12)) {
			return "", scpiserver.Errorf(scpiserver.DataOutOfRange, "%g Vrms not in %g..%g", vrms, gc.MinVrms, gc.MaxVrms)
		}
		g.vrms = math.Min(math.Max(vrms, gc.MinVrms), gc.MaxVrms)
		b.applyLocked(b.now())
		return "", nil
	})
	d.MustHandle(volt+"?", func(_ context.Context, c *scpiserver.Call) (string, error) {
		if err := c.Arity(0, 1); err != nil {
			return "", err
		}
		b.mu.Lock()
		defer b.mu.Unlock()
		v := b.gen.vrms
		if len(c.Args) == 1 {
			var err error
			v, err = c.Float(0, "", map[string]float64{"MINimum": gc.MinVrms, "MAXimum": gc.MaxVrms})
			if err != nil {
				return "", err
			}
		}
		ref := 0.0
		if b.gen.unit == unitDBm {
			var err error
			if ref, err = b.dbmRefLocked(); err != nil {
				return "", err
			}
		}
		return scpiserver.NR3(fromVrms(v, b.gen.unit, b.gen.shape, ref)), nil
	})
	b.offsetApplyCommands(d)
	d.MustHandle("[SOURce[1]:]VOLTage:UNIT", func(_ context.Context, c *scpiserver.Call) (string, error) {
		if err := c.Arity(1, 1); err != nil {
			return "", err
		}
		k, err := c.Choice(0, "VPP", "VRMS", "DBM")
		if err != nil {
			return "", err
		}
		b.mu.Lock()
		defer b.mu.Unlock()
		b.gen.unit = []ampUnit{unitVpp, unitVrms, unitDBm}[k]
		return "", nil
	})
	d.MustHandle("[SOURce[1]:]VOLTage:UNIT?", func(_ context.Context, c *scpiserver.Call) (string, error) {
		b.mu.Lock()
		defer b.mu.Unlock()
		return unitNames[b.gen.unit], c.Arity(0, 0)
	})
	d.MustHandle("[SOURce[1]:]FUNCtion[:SHAPe]", func(_ context.Context, c *scpiserver.Call) (string, error) {
		if err := c.Arity(1, 1); err != nil {
			return "", err
		}
		k, err := c.Choice(0, shapePatterns...)
		if err != nil {
			return "", err
		}
		b.mu.Lock()
		defer b.mu.Unlock()
		b.gen.shape = model.Shape(k)
		b.applyLocked(b.now())
		return "", nil
	})
	d.MustHandle("[SOURce[1]:]FUNCtion[:SHAPe]?", func(_ context.Context, c *scpiserver.Call) (string, error) {
		b.mu.Lock()
		defer b.mu.Unlock()
		return b.gen.shape.String(), c.Arity(0, 0)
	})
	d.MustHandle("OUTPut[1][:STATe]", func(_ context.Context, c *scpiserver.Call) (string, error) {
		if err := c.Arity(1, 1); err != nil {
			return "", err
		}
		on, err := c.Bool(0)
		if err != nil {
			return "", err
		}
		b.mu.Lock()
		defer b.mu.Unlock()
		b.gen.on = on
		b.applyLocked(b.now())
		return "", nil
	})
	d.MustHandle("OUTPut[1][:STATe]?", func(_ context.Context, c *scpiserver.Call) (string, error) {
		b.mu.Lock()
		defer b.mu.Unlock()
		return scpiserver.Bool(b.gen.on), c.Arity(0, 0)
	})
	d.MustHandle("OUTPut[1]:LOAD", func(_ context.Context, c *scpiserver.Call) (string, error) {
		if err := c.Arity(1, 1); err != nil {
			return "", err
		}
		n, err := c.Number(0, scpiserver.NumSpec{Unit: "OHM", Specials: map[string]float64{
			"INFinity": 0, "MINimum": minLoadOhm, "MAXimum": maxLoadOhm, "DEFault": gc.LoadOhm,
		}})
		if err != nil {
			return "", err
		}
		if n.Special == "" && (n.V < minLoadOhm || n.V > maxLoadOhm) {
			if n.V < scpiserver.Overflow*0.999 {
				return "", scpiserver.Errorf(scpiserver.DataOutOfRange, "%g Ω not in %d..%d or INF", n.V, minLoadOhm, maxLoadOhm)
			}
			n.V = 0 // 9.9E37 is infinity
		}
		b.mu.Lock()
		defer b.mu.Unlock()
		b.gen.loadOhm = n.V
		b.applyLocked(b.now())
		return "", nil
	})
	d.MustHandle("OUTPut[1]:LOAD?", func(_ context.Context, c *scpiserver.Call) (string, error) {
		b.mu.Lock()
		defer b.mu.Unlock()
		if b.gen.loadOhm == 0 {
			return scpiserver.NR3(scpiserver.Overflow), c.Arity(0, 0)
		}
		return scpiserver.NR3(b.gen.loadOhm), c.Arity(0, 0)
	})
	in.personality = gc.Personality
	switch gc.Personality {
	case PersonalityApplyVpp:
		b.applyVppCommands(d)
	case PersonalityOPCMute:
		b.opcMuteCommands(d)
	}
}

// resetGenerator is the generator's *RST: output off, settings from the
// configuration.
func (b *Bench) resetGenerator() {
	b.mu.Lock()
	defer b.mu.Unlock()
	b.gen = resetGen(&b.cfg.Generator)
	b.applyLocked(b.now())
}
