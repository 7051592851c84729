package sched_test

import (
	"context"
	"fmt"
	"strings"
	"sync"
	"testing"

	"rolloff/driver/bench"
	"rolloff/sweep/event"
	"rolloff/sweep/plan"
	"rolloff/sweep/sched"
)

// TestSimRangeHuntTwoChanges: the demo's first point (2 Hz) on the
// simulated demo bench, from starting ranges across the converter's
// twelve and at generator levels a hundredfold apart, finds its range in
// at most two changes, switched remotely or asked of the operator. The
// simulated converter has a noise floor (adding in power) and saturates
// at 1.2 × full scale, and its output hold may cover the first reading.
// A saturated reading bounds the output from below only; the range then
// chosen reads values up to about 700 times that bound (reachRange), so
// that an output more than that above the starting range's full scale
// (1.2 V on the 1 mV range) needs a third change: that case is held to
// three.
func TestSimRangeHuntTwoChanges(t *testing.T) {
	if testing.Short() {
		t.Skip("simulated bench")
	}
	for _, strat := range []string{plan.RangeRemote, plan.RangeOperator} {
		for _, start := range []int{0, 3, 6, 9, 11} {
			for _, lv := range []float64{0.005, 0.05, 0.5} {
				t.Run(fmt.Sprintf("%s/%d/%gV", strat, start, lv), func(t *testing.T) {
					cfg := simConfig(t, 10)
					most := 2
					if out := lv * 10 * 0.243; out > 700*cfg.Converter.Spec.Ranges[start].FullScaleVrms {
						most = 3 // beyond the reach of one change from a saturated reading
					}
					p := shortPlan(strat)
					p.Frequencies = plan.Frequencies{Spacing: plan.SpacingList, ListHz: []float64{2}}
					p.ReferenceHz = 2
					p.Drift.End = plan.DriftOff // one point: the first point's range hunt
					p.Level.Vrms = lv
					p.Ranging.Start = cfg.Converter.Spec.Ranges[start].Name
					var mu sync.Mutex
					var changes []string
					opts := sched.Opts{NoAnalysis: true, RangeKnown: true, CurrentRange: start}
					opts.Operator = func(ctx context.Context, pr event.Prompt) (int, error) {
						return pr.RangeIndex, nil // answered by the hook's SelectRange below
					}
					res := sweepOn(t, context.Background(), cfg, p, opts, func(r *sched.Run, b *bench.Bench) {
						ch, _ := r.Subscribe()
						go func() {
							for e := range ch {
								mu.Lock()
								if e.Type == event.TypePrompt && e.Prompt != nil {
									changes = append(changes, e.Prompt.FromRange+" → "+e.Prompt.Range+" ("+e.Message+")")
									_ = b.Sim.SelectRange(e.Prompt.RangeIndex)
								} else if strings.HasPrefix(e.Message, "range ") && strings.Contains(e.Message, "→") && !strings.Contains(e.Message, "(starting range)") {
									changes = append(changes, e.Message)
								}
								mu.Unlock()
							}
						}()
						if err := b.Sim.SelectRange(start); err != nil {
							t.Error(err)
						}
					})
					if res.err != nil {
						t.Fatal(res.err)
					}
					mu.Lock()
					defer mu.Unlock()
					if len(res.points) != 1 || len(res.points[0].Flags) != 0 {
						t.Fatalf("points %+v", res.points)
					}
					if len(changes) > most {
						t.Errorf("%d range changes: %s", len(changes), strings.Join(changes, "; "))
					}
					t.Logf("%d changes to %s: %s", len(changes), res.points[0].Range, strings.Join(changes, "; "))
				})
			}
		}
	}
}
