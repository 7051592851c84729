package sched

import (
	"context"
	"errors"
	"testing"

	"rolloff/driver"
	"rolloff/sweep/plan"
)

// TestSingleRangeNeedsNoStart: strategy fixed with no start on a converter
// with one range is accepted and measured on that range; with two ranges
// and the range unknown it is refused before any call reaches the
// instruments (the fake records every call).
func TestSingleRangeNeedsNoStart(t *testing.T) {
	c := newChain(newFakeClock())
	c.ranges = []driver.Range{{Name: "only", FullScaleVrms: 1, TimeConstantS: 0.2}}
	c.rangeIdx = 0
	p := testPlan(plan.RangeFixed)
	p.Frequencies.StartHz, p.Frequencies.StopHz = 500, 2000
	rec := &memRecorder{}
	if _, err := runOn(t, instruments(c), p, rec, Opts{Clock: c.clock}); err != nil {
		t.Fatalf("single range, no start: %v", err)
	}
	if rec.pointCount() == 0 {
		t.Error("no point measured")
	}

	c2 := newChain(newFakeClock())
	calls := 0
	inst := instruments(c2)
	inst.Generator = countingGen{c2, &calls}
	_, err := runOn(t, inst, p, &memRecorder{}, Opts{Clock: c2.clock})
	var fe *plan.FieldError
	if !errors.As(err, &fe) || fe.Field != "ranging.start" {
		t.Fatalf("five ranges, range unknown: %v; want a ranging.start refusal", err)
	}
	if calls != 0 {
		t.Errorf("%d generator calls before the refusal", calls)
	}
}

// countingGen counts every call that would reach the generator.
type countingGen struct {
	c     *chain
	calls *int
}

func (g countingGen) SetFrequency(ctx context.Context, f float64) error {
	*g.calls++
	return g.c.SetFrequency(ctx, f)
}
func (g countingGen) SetAmplitude(ctx context.Context, v float64) error {
	*g.calls++
	return g.c.SetAmplitude(ctx, v)
}
func (g countingGen) SetOutput(ctx context.Context, on bool) error {
	*g.calls++
	return g.c.SetOutput(ctx, on)
}
func (g countingGen) Limits() driver.GeneratorLimits { return g.c.Limits() }
func (g countingGen) Halt() error {
	*g.calls++
	return g.c.Halt()
}
