package model

import (
	"math"
	"testing"
)

// tenDB returns converter ranges 1 mV ... 316.2 V in 10 dB steps.
func tenDB() []Range {
	var rs []Range
	for k := 0; k < 12; k++ {
		rs = append(rs, Range{FullScaleVrms: 1e-3 * math.Pow(10, float64(k)/2), TauS: 0.4})
	}
	return rs
}

func settledConverter(t *testing.T, vrms float64, rng int) (*Converter, float64) {
	t.Helper()
	p := ConverterParams{Ranges: tenDB(), DCFullScaleV: 1, SaturateFraction: 1.2}
	c := NewConverter(p, 0, rng)
	c.SetInput(0, Analyze(Signal{Shape: Sine, FreqHz: 1000, Vrms: vrms}, &DUT{}, 0, 0), 0)
	return c, 60 * 0.4 // e^-60: settled
}

// Common practice: on a 31.62 mV full-scale range a 1 V-full-scale DC
// output reads 0.948 V for 30 mV (30/31.62); on a 100 mV range 0.8 V
// means 80 mV.
func TestRangeScaling(t *testing.T) {
	c, ts := settledConverter(t, 30e-3, 3)
	if got := c.MeanDC(ts, ts+0.2); math.Abs(got-30/(10*math.Sqrt(10))) > 1e-8 || math.Abs(got-0.948) > 0.001 {
		t.Errorf("30 mV on 31.62 mV: %.6f V, want 0.948683", got)
	}
	c, ts = settledConverter(t, 80e-3, 4)
	if got := c.MeanDC(ts, ts+0.2); math.Abs(got-0.8) > 1e-8 {
		t.Errorf("80 mV on 100 mV: %.9f V, want 0.8", got)
	}
	// The state is the input's mean square: changing range rescales the
	// output at once, with no settling.
	c.SelectRange(ts, 5)
	if got := c.MeanDC(ts+1e-9, ts+0.2); math.Abs(got-0.08/0.316227766) > 1e-7 {
		t.Errorf("after switching to 316.2 mV: %.6f V", got)
	}
	c.SelectRange(ts+1, -1)
	if got := c.DCOutput(ts + 1.5); got != 0 || c.Range() != -1 {
		t.Errorf("no range selected: %g V, range %d", got, c.Range())
	}
}

func TestSaturation(t *testing.T) {
	c, ts := settledConverter(t, 50e-3, 3) // 1.58 × full scale; ripple at 2 kHz is ±1e-4
	if got := c.DCOutput(ts); got != 1.2 || !c.Saturated(ts) {
		t.Errorf("over-range: %g V saturated %v, want 1.2 V and saturated", got, c.Saturated(ts))
	}
	c, ts = settledConverter(t, 35e-3, 3) // 1.107 × full scale
	if got := c.MeanDC(ts, ts+0.2); c.Saturated(ts) || math.Abs(got-35/31.6227766) > 1e-7 {
		t.Errorf("over full scale, below saturation: %g V saturated %v", got, c.Saturated(ts))
	}
}

func TestNoiseFloor(t *testing.T) {
	p := ConverterParams{Ranges: tenDB(), DCFullScaleV: 1, SaturateFraction: 1.2, FloorFraction: 0.002}
	c := NewConverter(p, 0, 6)
	c.SetInput(0, MeanSquare{FreqHz: 1000}, 0)
	if got := c.DCOutput(30); math.Abs(got-0.002) > 1e-12 {
		t.Errorf("zero input reads %g V, want the 0.2 %% floor", got)
	}
	c.SetInput(30, Analyze(Signal{Shape: Sine, FreqHz: 1000, Vrms: 0.1}, &DUT{}, 0, 0), 30)
	// 0.1 V on the 1 V range adds in power: √(0.1² + 0.002²).
	if got := c.MeanDC(60, 60.2); math.Abs(got-math.Hypot(0.1, 0.002)) > 1e-8 {
		t.Errorf("0.1 V with floor: %g", got)
	}
}
