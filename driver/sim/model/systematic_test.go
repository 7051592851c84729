package model

import (
	"math"
	"testing"
)

// TestConverterErrors: the input gain scales the input on the range and
// frequency it is given for (the state stays the true mean square, so a
// range change applies the new range's gain at once), and the end-point
// linearity error λ adds λ·4x(1−x) of full scale: λ at half scale,
// nothing at full scale.
func TestConverterErrors(t *testing.T) {
	gain := func(rng int, freqHz float64) float64 {
		g := 1 + 0.001*float64(rng) // range 6: +0.6 %
		if freqHz > 10e3 {
			g *= 0.98
		}
		return g
	}
	p := ConverterParams{Ranges: tenDB(), DCFullScaleV: 1, SaturateFraction: 1.2, InputGain: gain}
	c := NewConverter(p, 0, 6)
	c.SetInput(0, Analyze(Signal{Shape: Sine, FreqHz: 1000, Vrms: 0.5}, &DUT{}, 0, 0), 0)
	if got := c.MeanDC(24, 24.2); math.Abs(got-0.5*1.006) > 1e-8 {
		t.Errorf("1 kHz on range 6: %.9f V, want 0.503", got)
	}
	c.SetInput(24.2, Analyze(Signal{Shape: Sine, FreqHz: 20e3, Vrms: 0.5}, &DUT{}, 0, 0), 24.2)
	if got := c.MeanDC(48, 48.2); math.Abs(got-0.5*1.006*0.98) > 1e-8 {
		t.Errorf("20 kHz on range 6: %.9f V, want %.9f", got, 0.5*1.006*0.98)
	}
	c.SelectRange(48.2, 7)
	if got, want := c.MeanDC(48.3, 48.5), 0.5/math.Sqrt(10)*1.007*0.98; math.Abs(got-want) > 1e-8 {
		t.Errorf("after switching to range 7: %.9f V, want %.9f", got, want)
	}

	for _, tc := range []struct{ vrms, want float64 }{
		{0.5, 0.5 + 0.002},           // half scale: the whole λ
		{1.0, 1.0},                   // full scale: calibrated
		{0.1, 0.1 + 0.002*4*0.1*0.9}, // 0.1 of scale: 4·0.1·0.9·λ
		{0.25, 0.25 + 0.002*4*0.25*0.75},
	} {
		p := ConverterParams{Ranges: tenDB(), DCFullScaleV: 1, SaturateFraction: 1.2, Linearity: 0.002}
		c := NewConverter(p, 0, 6)
		c.SetInput(0, Analyze(Signal{Shape: Sine, FreqHz: 1000, Vrms: tc.vrms}, &DUT{}, 0, 0), 0)
		if got := c.MeanDC(24, 24.2); math.Abs(got-tc.want) > 1e-7 {
			t.Errorf("%g Vrms with λ = 0.002: %.9f V, want %.9f", tc.vrms, got, tc.want)
		}
	}
	if LinearityShape(0) != 0 || LinearityShape(1) != 0 || LinearityShape(0.5) != 1 {
		t.Error("LinearityShape is not 0 at the end points and 1 at half scale")
	}
}
