package sched_test

import (
	"math"
	"testing"

	"rolloff/sweep/point"
)

// TestPredictedPointsOnSimBench runs the demo plan's roll-off decade on
// the simulated bench with settle.predict on: points must end on
// predicted values, and every predicted gain must be within the settle
// tolerance of the gain a fully settled reading would show there (the
// simulator's DUT through its converter's droop and noise floor,
// package model; nothing of the scheduler's fit).
func TestPredictedPointsOnSimBench(t *testing.T) {
	p := honestPlan(t)
	on := true
	p.Settle.Predict = &on
	p.Frequencies.StartHz, p.Frequencies.StopHz = 50e3, 500e3
	p.ReferenceHz = 50e3
	p.Refine.Enabled = false
	p.Drift.End = "off"
	res := honestOurSweep(t, honestConfig(t, 5), p)
	tol := p.Settle.Tolerance
	predicted := 0
	for _, pt := range res.points {
		e := math.Pow(10, (pt.GainDB-res.settledDB(pt.FreqHz, pt.RangeIndex, p.Level.Vrms))/20) - 1
		t.Logf("%8.4g Hz %-9s %5.3f s %2d readings error %+.3f tol %s", pt.FreqHz, pt.Settle, pt.SettleS, pt.Readings, e/tol, pt.SettleWhy)
		if pt.Settle != point.SettlePredicted {
			continue
		}
		predicted++
		if math.Abs(e) > tol {
			t.Errorf("%g Hz: predicted gain %.3f tolerances from the settled one", pt.FreqHz, e/tol)
		}
	}
	if predicted < len(res.points)/2 {
		t.Errorf("%d of %d points predicted", predicted, len(res.points))
	}
}
