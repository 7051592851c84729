// Package onbench connects the scheduler to an opened bench: it turns a
// bench (driver/bench) and its profiles into the scheduler's Instruments
// and the settle model's meter and timing.
package onbench

import (
	"math"

	"github.com/rs/zerolog"

	"rolloff/driver/bench"
	"rolloff/driver/profile"
	"rolloff/sweep/plan"
	"rolloff/sweep/sched"
	"rolloff/sweep/settle"
)

// Instruments returns the scheduler's view of an opened bench.
func Instruments(b *bench.Bench, log zerolog.Logger) sched.Instruments {
	in := sched.Instruments{
		Generator:   b.Generator,
		DCVoltmeter: b.DCVoltmeter,
		Converter:   b.Converter,
		ACVoltmeter: b.ACVoltmeter,
		VinMeter:    b.Vin,
		TimeScale:   b.TimeScale,
		Limits:      b.Generator.Limits(),
		LineHz:      b.LineHz,
		DCRangeV:    b.DCConfig.RangeV,
		Log:         log,
	}
	if b.Config != nil {
		in.Meter = Meter(b.Config)
		if d := b.Config.DMM; d != nil && b.Config.VoltmeterMode == profile.ModeACDMM {
			in.ACRangeVrms = d.RangeVrms
		}
		if c := b.Config.Converter; c != nil && c.Spec != nil {
			in.HoldIntervalS, in.HoldS = c.Spec.HoldIntervalS, c.Spec.HoldS
		}
	}
	return in
}

// Meter describes the voltmeter's apertures from its profile. The bench's
// configured aperture (default 1 NPLC where the profile sets NPLC) is the
// shortest used, since whole power-line cycles reject mains hum on the DC
// output (common practice); the profile's settable apertures bound the
// longest. A meter that cannot set its integration time has the
// profile's fixed_aperture_s alone (Fixed); one without bursts
// (max_samples = 1) reads single values (Singles).
func Meter(cfg *profile.BenchFile) settle.Meter {
	line := 50.0
	var nplcs []float64
	var minS, maxS, fixedS float64
	base := 1 / line
	singles := false
	switch {
	case cfg.Voltmeter != nil && cfg.Voltmeter.DMM != nil:
		d := cfg.Voltmeter.DMM
		line = d.LineHz
		nplcs, minS, maxS, fixedS = d.DC.NPLC, d.DC.MinApertureS, d.DC.MaxApertureS, d.DC.FixedApertureS
		base = cfg.DCConfig().Aperture.Duration(line)
		singles = d.MaxSamples <= 1
	case cfg.DMM != nil && cfg.DMM.DMM != nil && cfg.DMM.DMM.AC != nil:
		d := cfg.DMM.DMM
		line = d.LineHz
		nplcs, minS, maxS, fixedS = d.AC.NPLC, d.AC.MinApertureS, d.AC.MaxApertureS, d.AC.FixedApertureS
		base = cfg.DMM.ACConfig().Aperture.Duration(line)
		singles = true
		if len(nplcs) == 0 && maxS == 0 && fixedS == 0 {
			fixedS = 1 / line // not stated: one power-line cycle assumed
		}
	}
	if maxS > 0 {
		lo := math.Max(minS, base)
		return settle.Meter{MinApertureS: lo, MaxApertureS: math.Max(maxS, lo), Singles: singles}
	}
	if len(nplcs) == 0 && fixedS > 0 {
		return settle.Meter{AperturesS: []float64{fixedS}, Fixed: true, Singles: singles}
	}
	var keep []float64
	for _, n := range nplcs {
		if n/line >= base*(1-1e-9) {
			keep = append(keep, n)
		}
	}
	if len(keep) == 0 {
		keep = []float64{base * line}
	}
	m := settle.NPLCMeter(keep, line, 0)
	m.Singles = singles
	return m
}

// Timing returns the settle model's timing of plan p on the bench
// described by cfg, for a DUT whose output changes by slopeDBPerDecade
// between points (0: flat).
func Timing(cfg *profile.BenchFile, p *plan.Plan, slopeDBPerDecade float64) *settle.Timing {
	t := &settle.Timing{
		Tol:              p.Settle.Tolerance,
		Readings:         p.Settle.Readings,
		MinDwellS:        p.Settle.MinDwellS,
		Meter:            Meter(cfg),
		SlopeDBPerDecade: slopeDBPerDecade,
	}
	if c := cfg.Converter; c != nil && c.Spec != nil {
		t.Ranges = c.Spec.DriverRanges()
		t.Window = c.Spec.Window()
	}
	if d := cfg.DMM; d != nil && d.DMM != nil && d.DMM.AC != nil && cfg.VoltmeterMode == profile.ModeACDMM {
		t.ACTauS = d.DMM.AC.SettleTauS
	}
	return t
}
