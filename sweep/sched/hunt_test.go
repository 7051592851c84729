package sched

import (
	"context"
	"fmt"
	"testing"

	"rolloff/sweep/event"
	"rolloff/sweep/plan"
)

// TestRangeHuntTwoChanges: from every starting range, at output levels
// spread over the converter's ranges (in the window of one, under or
// over the window of the others), the first point finds a range where it
// lands in the window in at most two changes, on the remote and the
// operator strategies. The fake converter overloads the voltmeter past
// 1.2 × full scale (a clipped reading, which shows no margin) and reads
// true down to zero.
func TestRangeHuntTwoChanges(t *testing.T) {
	levels := []float64{0.004, 0.012, 0.05, 0.2, 0.9} // Vrms at the DUT output
	for _, strat := range []string{plan.RangeRemote, plan.RangeOperator} {
		for start := 0; start < 5; start++ {
			for _, lv := range levels {
				t.Run(fmt.Sprintf("%s/r%d/%gV", strat, start, lv), func(t *testing.T) {
					clk := newFakeClock()
					c := newChain(clk)
					c.gain = lv / 0.05
					c.rangeIdx = start
					p := testPlan(strat)
					p.Frequencies = plan.Frequencies{Spacing: plan.SpacingList, ListHz: []float64{1000}}
					p.ReferenceHz = 1000
					p.Ranging.Start = fmt.Sprintf("r%d", start)
					inst := instruments(c)
					opts := Opts{Clock: clk, RangeKnown: true, CurrentRange: start}
					if strat == plan.RangeRemote {
						inst.Converter = remoteChain{c}
					} else {
						opts.Operator = func(ctx context.Context, pr event.Prompt) (int, error) {
							c.selectRange(pr.RangeIndex)
							return pr.RangeIndex, nil
						}
					}
					rec := &memRecorder{}
					if _, err := runOn(t, inst, p, rec, opts); err != nil {
						t.Fatal(err)
					}
					changes := 0
					prev := start
					for _, i := range c.switches {
						if i != prev {
							changes++
						}
						prev = i
					}
					if len(rec.points) != 1 {
						t.Fatalf("%d points", len(rec.points))
					}
					pt := rec.points[0]
					if len(pt.Flags) != 0 {
						t.Errorf("point flagged %v on %s", pt.Flags, pt.Range)
					}
					if changes > 2 {
						t.Errorf("%d range changes (%v) from r%d for %g Vrms", changes, c.switches, start, lv)
					}
					t.Logf("r%d → %v: %d changes", start, c.switches, changes)
				})
			}
		}
	}
}
