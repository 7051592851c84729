package sched

import (
	"errors"
	"fmt"

	"rolloff/driver"
	"rolloff/sweep/plan"
)

// PlanBench describes the instruments of a run for plan.CheckBench: the
// generator's effective limits (inst.Limits where set, else the
// generator's own; the lower amplitude cap of the two), the converter's ranges and whether they switch
// remotely, and whether the starting range is known (opts.RangeKnown, or
// a resumed run, which starts on its last point's range).
func PlanBench(inst Instruments, opts Opts) plan.Bench {
	var b plan.Bench
	if inst.Generator != nil {
		b.Limits = inst.Generator.Limits()
	}
	if l := inst.Limits; l.MaxVrms > 0 {
		if !(b.Limits.MaxVrms > 0) || l.MaxVrms < b.Limits.MaxVrms {
			b.Limits.MaxVrms = l.MaxVrms
		}
		if l.MaxFreqHz > 0 {
			b.Limits.MaxFreqHz = l.MaxFreqHz
		}
		if l.MinFreqHz > 0 {
			b.Limits.MinFreqHz = l.MinFreqHz
		}
		if l.MinVrms > 0 {
			b.Limits.MinVrms = l.MinVrms
		}
	}
	if inst.Converter != nil && inst.DCVoltmeter != nil {
		b.Ranges = inst.Converter.Ranges()
		_, b.RemoteRanges = inst.Converter.(driver.RangeSwitcher)
	}
	b.RangeKnown = opts.RangeKnown || opts.Resume
	return b
}

// CheckPlan checks plan p against the run's instruments before anything
// is sent to them (see plan.CheckBench). Start runs it first: a plan it
// refuses fails the run with no instrument touched.
func CheckPlan(p *plan.Plan, inst Instruments, opts Opts) error {
	return p.CheckBench(PlanBench(inst, opts))
}

// refusal is a plan refused by CheckPlan at the start of a run: nothing
// was sent, so the run ends without even the output-off of a halt.
type refusal struct{ err error }

func (e *refusal) Error() string {
	return fmt.Sprintf("sched: plan refused before touching the bench: %v", e.err)
}

func (e *refusal) Unwrap() error { return e.err }

// checkPlanFirst is the scheduler's check of the plan against the bench,
// before anything is sent.
func (s *sweeper) checkPlanFirst() error {
	if err := CheckPlan(s.plan, s.inst, s.r.opts); err != nil {
		return &refusal{err}
	}
	return nil
}

// refused reports whether err is a refusal of the plan before anything
// was sent (the run's end then sends nothing either).
func refused(err error) bool {
	var r *refusal
	return errors.As(err, &r)
}
