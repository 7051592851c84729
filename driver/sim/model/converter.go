package model

import "math"

// Range is one converter range.
type Range struct {
	FullScaleVrms float64
	TauS          float64
}

// ConverterParams describe an analog true-RMS converter with a DC output.
type ConverterParams struct {
	Ranges           []Range
	DCFullScaleV     float64 // DC output at full scale
	SaturateFraction float64 // the DC output saturates at this × DCFullScaleV
	FloorFraction    float64 // input-referred noise floor, fraction of full scale, adds in power
	Hold             Hold    // output frozen periodically
	// PostFilterS is the time constant of a first-order filter after the
	// averager (a second pole), physical seconds; 0: none.
	PostFilterS float64
	// InputGain, when set, is the converter's gain error on range rng
	// for an input at freqHz, as a factor on the reading (range
	// calibration times flatness; 1 is perfect). It scales the RMS the
	// mean-square state stands for, not the state, so that a range
	// change still rescales the output at once. Nil: no error.
	InputGain func(rng int, freqHz float64) float64
	// Linearity is the end-point linearity error λ, a fraction of full
	// scale: the DC output is x + λ·LinearityShape(x) of full scale for a
	// true fraction x. 0: linear.
	Linearity float64
}

// LinearityShape is the shape of the end-point linearity deviation at a
// fraction x of full scale, 4·x·(1−x): zero at zero and at full scale,
// largest (1) at half scale. It is the shape profile.LinearityShape
// documents for the converter profile's linearity_pct.
func LinearityShape(x float64) float64 { return 4 * x * (1 - x) }

// Converter is the averaging true-RMS converter: its state is the mean
// square of its input (independent of the range), its DC output
// √y/FS·DCFullScaleV on the selected range. Range -1 means no range
// selected (the input is disconnected, the output 0 V).
type Converter struct {
	p     ConverterParams
	avg   *Averager
	input MeanSquare // at the converter input, droop applied
	ts    float64
}

// NewConverter returns a converter at rest at time t0 on range rng.
func NewConverter(p ConverterParams, t0 float64, rng int) *Converter {
	c := &Converter{p: p}
	c.avg = NewFilteredAverager(t0, c.tau(rng), p.PostFilterS, rng)
	return c
}

func (c *Converter) tau(rng int) float64 {
	if rng >= 0 && rng < len(c.p.Ranges) {
		return c.p.Ranges[rng].TauS
	}
	// No range selected: keep the last time constant.
	if c.avg != nil {
		_, _, tau, _ := c.avg.Last()
		return tau
	}
	return c.p.Ranges[0].TauS
}

// effective returns the averaged input on range rng: the signal plus the
// range's noise floor, or nothing when no range is selected.
func (c *Converter) effective(rng int) MeanSquare {
	if rng < 0 || rng >= len(c.p.Ranges) {
		return MeanSquare{FreqHz: c.input.FreqHz}
	}
	ms := c.input
	floor := c.p.FloorFraction * c.p.Ranges[rng].FullScaleVrms
	ms.C0 += floor * floor
	return ms
}

// SetInput changes the converter's input at time t; ts is the phase
// reference of ms (the time the signal started).
func (c *Converter) SetInput(t float64, ms MeanSquare, ts float64) {
	c.input, c.ts = ms, ts
	rng := c.Range()
	c.avg.Set(t, c.effective(rng), ts, c.tau(rng), rng)
}

// SelectRange selects range rng (-1: none) at time t. The mean-square
// state carries over; the time constant becomes the new range's.
func (c *Converter) SelectRange(t float64, rng int) {
	if rng < -1 || rng >= len(c.p.Ranges) {
		rng = -1
	}
	c.avg.Set(t, c.effective(rng), c.ts, c.tau(rng), rng)
}

// Range returns the selected range (-1: none).
func (c *Converter) Range() int {
	_, _, _, tag := c.avg.Last()
	return tag
}

// Ranges returns the number of ranges.
func (c *Converter) Ranges() int { return len(c.p.Ranges) }

// dc maps a mean-square state on range rng to the unsaturated DC output.
func (c *Converter) dc(y float64, rng int) float64 {
	if rng < 0 || rng >= len(c.p.Ranges) {
		return 0
	}
	if c.p.InputGain != nil || c.p.Linearity != 0 {
		x := math.Sqrt(math.Max(y, 0)) / c.p.Ranges[rng].FullScaleVrms
		if c.p.InputGain != nil {
			x *= c.p.InputGain(rng, c.input.FreqHz)
		}
		return (x + c.p.Linearity*LinearityShape(x)) * c.p.DCFullScaleV
	}
	return math.Sqrt(math.Max(y, 0)) / c.p.Ranges[rng].FullScaleVrms * c.p.DCFullScaleV
}

// output is the DC output stage: the unsaturated output clamped at the
// saturation level.
func (c *Converter) output(y float64, rng int) float64 {
	return math.Min(c.dc(y, rng), c.p.SaturateFraction*c.p.DCFullScaleV)
}

// DCOutput returns the noise-free DC output at t, V.
func (c *Converter) DCOutput(t float64) float64 {
	return c.avg.At(t, c.output, c.p.Hold)
}

// MeanDC returns the mean DC output over [t0, t1], V.
func (c *Converter) MeanDC(t0, t1 float64) float64 {
	return c.avg.Mean(t0, t1, c.output, c.p.Hold)
}

// Saturated reports whether the output stage is saturated at t (the input
// is beyond SaturateFraction of full scale).
func (c *Converter) Saturated(t float64) bool {
	return c.avg.At(t, c.dc, c.p.Hold) > c.p.SaturateFraction*c.p.DCFullScaleV
}

// MeanSquare returns the averager state y(t), V² at the input.
func (c *Converter) MeanSquare(t float64) float64 { return c.avg.Value(t) }

// Params returns the converter's parameters.
func (c *Converter) Params() ConverterParams { return c.p }
