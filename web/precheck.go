package web

import (
	"rolloff/sweep/plan"
	"rolloff/sweep/sched"
)

// CheckPlan checks a submitted plan against the served bench (plan
// ranges, strategy, limits) so that a plan the bench cannot run is
// answered 400 naming the field, before it is queued and before anything
// reaches an instrument.
func (g *bridge) CheckPlan(p *plan.Plan) error {
	opts := sched.Opts{}
	if g.b.Sim != nil {
		opts.RangeKnown = g.b.Sim.ConverterRange() >= 0
	}
	inst := sched.Instruments{
		Generator: g.b.Generator, DCVoltmeter: g.b.DCVoltmeter, Converter: g.b.Converter,
		ACVoltmeter: g.b.ACVoltmeter, Limits: g.Limits(),
	}
	return sched.CheckPlan(p, inst, opts)
}
