package sim

import (
	"context"
	"fmt"
	"math"
	"strings"

	"rolloff/driver/sim/model"
	"rolloff/driver/sim/scpiserver"
)

// meterKind tells the DC voltmeter from the AC DMM.
type meterKind int

const (
	dcMeter meterKind = iota
	acMeter
)

// meter is the state of an integrating voltmeter (DC on the converter
// output, or AC true RMS on the DUT output). Handlers run one at a time
// under the instrument's lock, so the state needs no lock of its own.
type meter struct {
	b          *Bench
	kind       meterKind
	faults     *Faults
	ranges     []float64
	over       float64
	maxSamples int
	resetNPLC  float64
	noiseV     float64

	rng       int  // selected range index
	auto      bool // autorange
	byNPLC    bool
	nplc      float64
	apertureS float64
	samples   int
	meas      *measurement

	personality string
}

// measurement is one triggered burst: n readings of aperture ta from
// model time t0.
type measurement struct {
	t0, ta   float64
	n        int
	readings []float64
}

func (m *meter) reset() {
	m.rng = len(m.ranges) - 1
	m.auto = true
	m.byNPLC = true
	m.nplc = m.resetNPLC
	m.apertureS = m.resetNPLC / m.b.cfg.LineHz
	m.samples = 1
	m.meas = nil
}

// aperture returns the integration time in model seconds.
func (m *meter) aperture() float64 {
	if m.byNPLC {
		return m.nplc / m.b.cfg.LineHz
	}
	return m.apertureS
}

// rangeFor returns the smallest range holding v, or -1.
func (m *meter) rangeFor(v float64) int {
	for i, r := range m.ranges {
		if v <= r*(1+1e-9) {
			return i
		}
	}
	return -1
}

// start begins a measurement now.
func (m *meter) start() error {
	if m.meas != nil && m.meas.readings == nil && m.b.now() < m.meas.t0+float64(m.meas.n)*m.meas.ta {
		return scpiserver.Errorf(scpiserver.InitIgnored, "measurement in progress")
	}
	m.meas = &measurement{t0: m.b.now(), ta: m.aperture(), n: m.samples}
	return nil
}

// fetch waits for the measurement to end and returns its readings.
func (m *meter) fetch(ctx context.Context) ([]float64, error) {
	ms := m.meas
	if ms == nil {
		return nil, scpiserver.Errorf(scpiserver.DataStale, "no measurement; send INITiate or READ?")
	}
	if ms.readings != nil {
		return ms.readings, nil
	}
	if err := m.b.sleepUntil(ctx, ms.t0+float64(ms.n)*ms.ta); err != nil {
		return nil, scpiserver.Errorf(scpiserver.ExecutionError, "measurement aborted")
	}
	b := m.b
	b.mu.Lock()
	out := make([]float64, ms.n)
	for i := range out {
		lo := ms.t0 + float64(i)*ms.ta
		hi := lo + ms.ta
		var v float64
		linePeriod := 1 / b.cfg.LineHz
		switch m.kind {
		case dcMeter:
			cc := &b.cfg.Converter
			if b.wallAt(lo).Before(b.overUntil) {
				v = cc.SaturateFraction * cc.DCFullScaleV
			} else {
				v = b.conv.MeanDC(lo, hi) * b.drift.factor((lo+hi)/2)
			}
			if cc.NoiseV > 0 {
				v += noise(b.rngConv, cc.NoiseV*math.Sqrt(math.Min(1, 1/(2*cc.NoiseBandwidthHz*ms.ta))))
			}
			v += noise(b.rngVM, m.noiseV*math.Sqrt(linePeriod/ms.ta))
		case acMeter:
			v = b.dmm.Mean(lo, hi, func(y float64, _ int) float64 { return math.Sqrt(math.Max(y, 0)) }, model.Hold{})
			v = math.Abs(v + noise(b.rngDMM, m.noiseV*math.Sqrt(linePeriod/ms.ta)))
		}
		out[i] = m.rangeReading(v)
	}
	b.mu.Unlock()
	ms.readings = out
	return out, m.queryLatency(ctx)
}

// rangeReading applies the range: autorange picks the smallest range
// holding the reading; beyond range × (1 + over-range) the answer is the
// overflow value.
func (m *meter) rangeReading(v float64) float64 {
	if m.faults.takeOverflow() {
		return scpiserver.Overflow
	}
	if m.auto {
		if k := m.rangeFor(math.Abs(v)); k >= 0 {
			m.rng = k
		} else {
			m.rng = len(m.ranges) - 1
		}
	}
	if m.kind == dcMeter {
		v = m.b.sys.VoltmeterReading(m.rng, v)
	}
	if math.Abs(v) > m.ranges[m.rng]*(1+m.over) {
		if v < 0 {
			return scpiserver.NegativeOver
		}
		return scpiserver.Overflow
	}
	return v
}

// configure applies a CONFigure/MEASure range argument.
func (m *meter) configure(c *scpiserver.Call) error {
	if err := c.Arity(0, 2); err != nil {
		return err
	}
	if len(c.Args) >= 1 {
		if err := m.setRange(c, 0, true); err != nil {
			return err
		}
	} else {
		m.auto = true
	}
	if len(c.Args) == 2 {
		// The resolution is accepted and checked but the simulated
		// meters resolve far better than their noise anyway.
		v, err := c.Float(1, "V", map[string]float64{"MINimum": 0, "MAXimum": 0, "DEFault": 0})
		if err != nil {
			return err
		}
		if v < 0 {
			return scpiserver.Errorf(scpiserver.DataOutOfRange, "resolution %g", v)
		}
	}
	m.samples = 1
	m.meas = nil
	return nil
}

// setRange sets the range from argument i; allowAuto accepts AUTO.
func (m *meter) setRange(c *scpiserver.Call, i int, allowAuto bool) error {
	if allowAuto && c.IsChar(i, "AUTO") {
		m.auto = true
		return nil
	}
	top := m.ranges[len(m.ranges)-1]
	n, err := c.Number(i, scpiserver.NumSpec{Unit: "V", Specials: map[string]float64{
		"MINimum": m.ranges[0], "MAXimum": top, "DEFault": top,
	}})
	if err != nil {
		return err
	}
	if n.Special == "DEFault" && allowAuto {
		m.auto = true
		return nil
	}
	k := m.rangeFor(math.Abs(n.V))
	if k < 0 {
		return scpiserver.Errorf(scpiserver.DataOutOfRange, "%g V above the %g V range", n.V, top)
	}
	m.rng, m.auto = k, false
	return nil
}

// commands registers the meter's SENSe, trigger and measurement commands.
func (m *meter) commands(d *scpiserver.Device) {
	fn, confFn, funcName := "VOLTage[:DC]", "VOLTage[:DC]", `"VOLT"`
	if m.kind == acMeter {
		fn, confFn, funcName = "VOLTage:AC", "VOLTage:AC", `"VOLT:AC"`
	}
	sense := "[SENSe:]" + fn
	h := func(pat string, f func(ctx context.Context, c *scpiserver.Call) (string, error)) {
		d.MustHandle(pat, f)
	}
	h("CONFigure[:SCALar]:"+confFn, func(_ context.Context, c *scpiserver.Call) (string, error) {
		return "", m.configure(c)
	})
	h("CONFigure?", func(_ context.Context, c *scpiserver.Call) (string, error) {
		return fmt.Sprintf(`"%s %s,%s"`, strings.Trim(funcName, `"`), scpiserver.NR3(m.ranges[m.rng]), "DEF"), c.Arity(0, 0)
	})
	h("MEASure[:SCALar]:"+confFn+"?", func(ctx context.Context, c *scpiserver.Call) (string, error) {
		if err := m.configure(c); err != nil {
			return "", err
		}
		if err := m.start(); err != nil {
			return "", err
		}
		r, err := m.fetch(ctx)
		return m.answer(r), err
	})
	h("[SENSe:]FUNCtion[:ON]", func(_ context.Context, c *scpiserver.Call) (string, error) {
		if err := c.Arity(1, 1); err != nil {
			return "", err
		}
		if c.Args[0].Kind != scpiserver.ArgString {
			return "", scpiserver.Errorf(scpiserver.DataTypeError, "function is a string")
		}
		s := strings.ToUpper(strings.TrimSpace(c.Args[0].Str))
		ok := false
		if m.kind == dcMeter {
			ok = s == "VOLT" || s == "VOLTAGE" || s == "VOLT:DC" || s == "VOLTAGE:DC"
		} else {
			ok = s == "VOLT:AC" || s == "VOLTAGE:AC"
		}
		if !ok {
			return "", scpiserver.Errorf(scpiserver.IllegalParameter, "function %q not available", clipStr(s))
		}
		return "", nil
	})
	h("[SENSe:]FUNCtion[:ON]?", func(_ context.Context, c *scpiserver.Call) (string, error) {
		return funcName, c.Arity(0, 0)
	})
	h(sense+":RANGe[:UPPer]", func(_ context.Context, c *scpiserver.Call) (string, error) {
		if err := c.Arity(1, 1); err != nil {
			return "", err
		}
		return "", m.setRange(c, 0, false)
	})
	h(sense+":RANGe[:UPPer]?", func(_ context.Context, c *scpiserver.Call) (string, error) {
		return scpiserver.NR3(m.ranges[m.rng]), c.Arity(0, 0)
	})
	h(sense+":RANGe:AUTO", func(_ context.Context, c *scpiserver.Call) (string, error) {
		if err := c.Arity(1, 1); err != nil {
			return "", err
		}
		if c.IsChar(0, "ONCE") {
			m.auto = false
			return "", nil
		}
		on, err := c.Bool(0)
		if err != nil {
			return "", err
		}
		m.auto = on
		return "", nil
	})
	h(sense+":RANGe:AUTO?", func(_ context.Context, c *scpiserver.Call) (string, error) {
		return scpiserver.Bool(m.auto), c.Arity(0, 0)
	})
	h(sense+":NPLCycles", func(_ context.Context, c *scpiserver.Call) (string, error) {
		if err := c.Arity(1, 1); err != nil {
			return "", err
		}
		v, err := c.Float(0, "", map[string]float64{"MINimum": MinNPLC, "MAXimum": MaxNPLC, "DEFault": m.resetNPLC})
		if err != nil {
			return "", err
		}
		if v < MinNPLC || v > MaxNPLC {
			return "", scpiserver.Errorf(scpiserver.DataOutOfRange, "%g NPLC not in %g..%g", v, float64(MinNPLC), float64(MaxNPLC))
		}
		m.nplc, m.byNPLC = v, true
		return "", nil
	})
	h(sense+":NPLCycles?", func(_ context.Context, c *scpiserver.Call) (string, error) {
		return scpiserver.NR3(m.aperture() * m.b.cfg.LineHz), c.Arity(0, 0)
	})
	h(sense+":APERture", func(_ context.Context, c *scpiserver.Call) (string, error) {
		if err := c.Arity(1, 1); err != nil {
			return "", err
		}
		v, err := c.Float(0, "S", map[string]float64{"MINimum": MinApertureS, "MAXimum": MaxApertureS, "DEFault": m.resetNPLC / m.b.cfg.LineHz})
		if err != nil {
			return "", err
		}
		if v < MinApertureS || v > MaxApertureS {
			return "", scpiserver.Errorf(scpiserver.DataOutOfRange, "%g s not in %g..%g", v, float64(MinApertureS), float64(MaxApertureS))
		}
		m.apertureS, m.byNPLC = v, false
		return "", nil
	})
	h(sense+":APERture?", func(_ context.Context, c *scpiserver.Call) (string, error) {
		return scpiserver.NR3(m.aperture()), c.Arity(0, 0)
	})
	h("SAMPle:COUNt", func(_ context.Context, c *scpiserver.Call) (string, error) {
		if err := c.Arity(1, 1); err != nil {
			return "", err
		}
		n, err := c.Int(0, 1, m.maxSamples)
		if err != nil {
			return "", err
		}
		m.samples = n
		return "", nil
	})
	h("SAMPle:COUNt?", func(_ context.Context, c *scpiserver.Call) (string, error) {
		return scpiserver.NR1(m.samples), c.Arity(0, 0)
	})
	h("TRIGger[:SEQuence]:SOURce", func(_ context.Context, c *scpiserver.Call) (string, error) {
		if err := c.Arity(1, 1); err != nil {
			return "", err
		}
		_, err := c.Choice(0, "IMMediate")
		return "", err
	})
	h("TRIGger[:SEQuence]:SOURce?", func(_ context.Context, c *scpiserver.Call) (string, error) {
		return "IMM", c.Arity(0, 0)
	})
	h("INITiate[:IMMediate]", func(_ context.Context, c *scpiserver.Call) (string, error) {
		if err := c.Arity(0, 0); err != nil {
			return "", err
		}
		return "", m.start()
	})
	h("ABORt", func(_ context.Context, c *scpiserver.Call) (string, error) {
		m.meas = nil
		return "", c.Arity(0, 0)
	})
	h("FETCh?", func(ctx context.Context, c *scpiserver.Call) (string, error) {
		if err := c.Arity(0, 0); err != nil {
			return "", err
		}
		r, err := m.fetch(ctx)
		return m.answer(r), err
	})
	h("READ?", func(ctx context.Context, c *scpiserver.Call) (string, error) {
		if err := c.Arity(0, 0); err != nil {
			return "", err
		}
		if err := m.start(); err != nil {
			return "", err
		}
		r, err := m.fetch(ctx)
		return m.answer(r), err
	})
}

func clipStr(s string) string {
	if len(s) > 32 {
		return s[:32]
	}
	return s
}

func (b *Bench) newMeter(kind meterKind, f *Faults) *meter {
	m := &meter{b: b, kind: kind, faults: f}
	if kind == dcMeter {
		c := &b.cfg.Voltmeter
		m.ranges, m.over, m.maxSamples, m.resetNPLC, m.noiseV = c.RangesV, c.OverRangeFraction, c.MaxSamples, c.ResetNPLC, c.NoiseV
	} else {
		c := &b.cfg.DMM
		m.ranges, m.over, m.maxSamples, m.resetNPLC, m.noiseV = c.RangesVrms, c.OverRangeFraction, c.MaxSamples, c.ResetNPLC, c.NoiseV
	}
	m.reset()
	return m
}

// voltmeterCommands registers the DC voltmeter's command set.
func (b *Bench) voltmeterCommands(in *instrument) {
	m := b.newMeter(dcMeter, in.faults)
	m.personality = b.cfg.Voltmeter.Personality
	in.reset = m.reset
	m.commands(in.dev)
	in.setMeterPersonality(b.cfg.Voltmeter.Personality)
}

// setMeterPersonality restricts a meter's commands to its dialect.
func (in *instrument) setMeterPersonality(p string) {
	in.personality = p
	restrictMeter(in.dev, p)
	if p == PersonalitySuffixed {
		idn := suffixedIDN(in.idn)
		in.dev.Remove(func(pat string) bool { return pat == "*IDN?" })
		in.dev.MustHandle("*IDN?", func(_ context.Context, c *scpiserver.Call) (string, error) {
			return idn, c.Arity(0, 0)
		})
	}
}

// dmmCommands registers the AC DMM's command set.
func (b *Bench) dmmCommands(in *instrument) {
	m := b.newMeter(acMeter, in.faults)
	m.personality = b.cfg.DMM.Personality
	in.reset = m.reset
	m.commands(in.dev)
	in.setMeterPersonality(b.cfg.DMM.Personality)
}
