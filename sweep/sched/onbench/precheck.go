package onbench

import (
	"rolloff/driver/instr"
	"rolloff/driver/profile"
	"rolloff/driver/sim"
	"rolloff/sweep/plan"
)

// PlanBench describes a bench file for plan.CheckBench without opening
// any instrument: the generator's effective limits (profile and bench
// file, offset included), the converter's ranges and whether a relay
// switches them, and whether the starting range is known (a simulated
// converter has a power-on range).
func PlanBench(cfg *profile.BenchFile) (plan.Bench, error) {
	var b plan.Bench
	b.Limits = cfg.Limits.Driver()
	if g := cfg.Generator; g != nil && g.Generator != nil {
		lim, err := instr.GeneratorLimitsFor(g.Generator, cfg.Limits.Driver())
		if err != nil {
			return b, err
		}
		b.Limits = lim
	}
	if cfg.VoltmeterMode != profile.ModeACDMM {
		if c := cfg.Converter; c != nil && c.Spec != nil {
			b.Ranges = c.Spec.DriverRanges()
			b.RemoteRanges = c.Spec.Selection == profile.SelectRemote && cfg.Switch != nil
		}
	}
	if cfg.Sim != nil {
		sc, err := sim.FromBenchFile(cfg)
		if err != nil {
			return b, err
		}
		b.RangeKnown = sc.Converter.InitialRange >= 0
	}
	return b, nil
}

// CheckPlan checks plan p against bench file cfg (plan.CheckBench) before
// anything is opened.
func CheckPlan(cfg *profile.BenchFile, p *plan.Plan) error {
	b, err := PlanBench(cfg)
	if err != nil {
		return err
	}
	return p.CheckBench(b)
}
