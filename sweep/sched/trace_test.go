package sched

import (
	"bytes"
	"context"
	"flag"
	"fmt"
	"os"
	"path/filepath"
	"testing"

	"rolloff/sweep/event"
	"rolloff/sweep/plan"
)

var updateTrace = flag.Bool("update-trace", false, "rewrite testdata/trace_golden.txt")

// TestDecisionTrace runs the fake bench (exact first-order converter,
// deterministic noise, virtual clock) through every ranging strategy, the
// output hold and the refinement, and compares each point's frequency,
// range, level, reading, readings count, settle time and flags, and the
// run's total physical time, with the trace recorded before the
// scheduler's code was reorganised: a change of structure that changes
// a decision shows here. A deliberate change of behaviour rewrites it
// with -update-trace (and says why in its commit).
func TestDecisionTrace(t *testing.T) {
	var out bytes.Buffer
	type scenario struct {
		name  string
		setup func(c *chain, p *plan.Plan, inst *Instruments, opts *Opts)
		strat string
	}
	remote := func(c *chain, p *plan.Plan, inst *Instruments, opts *Opts) { inst.Converter = remoteChain{c} }
	for _, sc := range []scenario{
		{"remote-tau0.5-noise", func(c *chain, p *plan.Plan, inst *Instruments, opts *Opts) {
			remote(c, p, inst, opts)
			for i := range c.ranges {
				c.ranges[i].TimeConstantS = 0.5
			}
			c.noiseRel = 5e-5
		}, plan.RangeRemote},
		{"remote-hold", func(c *chain, p *plan.Plan, inst *Instruments, opts *Opts) {
			remote(c, p, inst, opts)
			c.holdEvery, c.holdS = 6, 0.5
			inst.HoldIntervalS, inst.HoldS = 6, 0.5
			for i := range c.ranges {
				c.ranges[i].TimeConstantS = 0.3
			}
		}, plan.RangeRemote},
		{"remote-refine", func(c *chain, p *plan.Plan, inst *Instruments, opts *Opts) {
			remote(c, p, inst, opts)
			p.Refine = plan.Refine{Enabled: true, LevelDB: plan.HalfPowerDB, ResolutionRel: 0.002, MaxPoints: 40}
		}, plan.RangeRemote},
		{"operator", func(c *chain, p *plan.Plan, inst *Instruments, opts *Opts) {
			opts.Operator = func(ctx context.Context, pr event.Prompt) (int, error) {
				c.selectRange(pr.RangeIndex)
				return pr.RangeIndex, nil
			}
		}, plan.RangeOperator},
		{"level", func(c *chain, p *plan.Plan, inst *Instruments, opts *Opts) {
			p.Ranging.Start = "r1"
			c.rangeIdx = 1
			p.Level = plan.Level{Vrms: 0.02, MinVrms: 0.005, MaxVrms: 0.5}
		}, plan.RangeLevel},
		{"fixed", func(c *chain, p *plan.Plan, inst *Instruments, opts *Opts) {
			p.Ranging.Start = "r2"
		}, plan.RangeFixed},
	} {
		clk := newFakeClock()
		c := newChain(clk)
		p := testPlan(sc.strat)
		rec := &memRecorder{}
		inst := instruments(c)
		opts := Opts{Clock: clk}
		sc.setup(c, p, &inst, &opts)
		if _, err := runOn(t, inst, p, rec, opts); err != nil {
			t.Fatalf("%s: %v", sc.name, err)
		}
		fmt.Fprintf(&out, "# %s: %d points, %.9g s\n", sc.name, len(rec.points), c.now())
		for _, pt := range rec.points {
			fmt.Fprintf(&out, "%d %d %.9g %d %.9g %.9g %d %.9g %v\n", pt.Seq, pt.Index, pt.FreqHz, pt.RangeIndex,
				pt.VinVrms, pt.VoutVrms, pt.Readings, pt.SettleS, pt.Flags)
		}
	}
	path := filepath.Join("testdata", "trace_golden.txt")
	if *updateTrace {
		if err := os.WriteFile(path, out.Bytes(), 0o644); err != nil {
			t.Fatal(err)
		}
		return
	}
	want, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(want, out.Bytes()) {
		got, wl := bytes.Split(out.Bytes(), []byte("\n")), bytes.Split(want, []byte("\n"))
		for i := 0; i < len(got) || i < len(wl); i++ {
			var g, w []byte
			if i < len(got) {
				g = got[i]
			}
			if i < len(wl) {
				w = wl[i]
			}
			if !bytes.Equal(g, w) {
				t.Fatalf("line %d:\n got %s\nwant %s", i+1, g, w)
			}
		}
	}
}
