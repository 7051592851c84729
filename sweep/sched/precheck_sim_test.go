package sched_test

import (
	"context"
	"errors"
	"strings"
	"testing"

	"github.com/rs/zerolog"

	"rolloff/sweep/plan"
	"rolloff/sweep/sched"
	"rolloff/sweep/sched/onbench"
)

// TestBadPlanTouchesNothing: plans the bench cannot run are refused before
// a single command reaches a simulated instrument (the simulator's record
// of what each instrument received is unchanged), naming the plan field.
func TestBadPlanTouchesNothing(t *testing.T) {
	for _, c := range []struct {
		name, field string
		edit        func(p *plan.Plan)
		rangeKnown  bool
	}{
		{"no such range", "ranging.start", func(p *plan.Plan) { p.Ranging.Start = "7 V" }, true},
		{"fixed, range unknown", "ranging.start", func(p *plan.Plan) { p.Ranging.Strategy = plan.RangeFixed }, false},
		{"level, range unknown", "ranging.start", func(p *plan.Plan) {
			p.Ranging.Strategy, p.Level.MinVrms, p.Level.MaxVrms = plan.RangeLevel, 0.01, 0.5
		}, false},
		{"above the generator's frequency", "frequencies.stop_hz", func(p *plan.Plan) { p.Frequencies.StopHz = 5e6 }, true},
		{"above the amplitude limit", "level.vrms", func(p *plan.Plan) { p.Level.Vrms = 1.5 }, true},
		{"level window above the limit", "level.max_vrms", func(p *plan.Plan) {
			p.Ranging.Strategy, p.Ranging.Start, p.Level.MinVrms, p.Level.MaxVrms = plan.RangeLevel, "1 V", 0.01, 3
		}, true},
	} {
		t.Run(c.name, func(t *testing.T) {
			cfg := simConfig(t, 2000)
			p := shortPlan(plan.RangeRemote)
			c.edit(p)
			b, run := newRun(t, cfg, p, t.TempDir())
			defer b.Close()
			defer run.Close()
			before := map[string]int{}
			for _, role := range []string{"generator", "voltmeter", "switch"} {
				before[role] = len(b.Sim.Received(role))
			}
			opts := sched.Opts{NoAnalysis: true, RangeKnown: c.rangeKnown, CurrentRange: b.Sim.ConverterRange()}
			err := sched.Start(context.Background(), onbench.Instruments(b, zerolog.Nop()), p, run, opts).Wait()
			var fe *plan.FieldError
			if !errors.As(err, &fe) || fe.Field != c.field {
				t.Fatalf("run error %v; want a plan error naming %s", err, c.field)
			}
			for role, n := range before {
				if got := b.Sim.Received(role); len(got) != n {
					t.Errorf("%s received %q after the refusal", role, got[n:])
				}
			}
			if !strings.Contains(err.Error(), c.field) {
				t.Errorf("error %q does not name %s", err, c.field)
			}
		})
	}
}
