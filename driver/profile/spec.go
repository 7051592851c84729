package profile

import (
	"fmt"
	"math"
)

// Specification components.
//
// A data sheet states each error as a ± limit. Read as a rectangular
// distribution on [−a, a] (JCGM 100:2008 §4.3.7), its standard
// uncertainty is a/√3. What matters for an uncertainty budget is which
// readings share an error (JCGM 100:2008 §5.2), so the profiles split
// their specification into components by what they are common to:
//
//   - converter range gain (range_gain_pct): one error per range, common
//     to every reading on that range;
//   - converter flatness (accuracy[].flatness_pct): one error per row of
//     the accuracy table, common to every reading in that band;
//   - converter linearity (linearity_pct): one end-point linearity error,
//     a deviation that depends on the fraction of scale;
//   - DC voltmeter gain and offset per range (dc.accuracy[]: reading_pct
//     and range_pct);
//   - generator amplitude (accuracy.amplitude_pct, common to every
//     frequency) and flatness by band (accuracy.flatness[].flatness_db,
//     common within a band).
//
// The simulated bench draws its systematic errors from the same figures.

// LinearityShape is the shape of the converter's end-point linearity
// deviation at a fraction x of full scale: 4·x·(1−x), 0 at zero and at
// full scale, 1 at half scale. A converter with linearity error λ
// (fraction of full scale) reads x + λ·LinearityShape(x) of full scale,
// so its relative error at x is 4·λ·(1−x). (A parabola through the two
// calibration points is the simplest deviation end-point linearity
// allows; the simulated converter uses the same one.)
func LinearityShape(x float64) float64 { return 4 * x * (1 - x) }

// RangeGainRel returns the half-width of the converter's range-gain
// specification as a fraction of reading (range_gain_pct/100), common to
// every reading on one range.
func (c *Converter) RangeGainRel() float64 { return c.RangeGainPct / 100 }

// LinearityFS returns the half-width of the converter's end-point
// linearity specification as a fraction of full scale (linearity_pct/100).
func (c *Converter) LinearityFS() float64 { return c.LinearityPct / 100 }

// LinearityRel returns the half-width of the linearity error as a
// fraction of a reading at fraction x of full scale: 4·(1−x)·LinearityFS
// (see LinearityShape).
func (c *Converter) LinearityRel(x float64) float64 {
	return math.Abs(4 * (1 - x) * c.LinearityFS())
}

// FlatnessRel returns the half-width of the converter's flatness
// specification as a fraction of reading for a range and frequency, and
// the band it belongs to: the index of the first accuracy row that
// matches (as AccuracyRel). Readings in one band share one flatness
// error.
func (c *Converter) FlatnessRel(rangeIndex int, freqHz float64) (rel float64, band int, ok bool) {
	band = c.accuracyRow(rangeIndex, freqHz)
	if band < 0 {
		return 0, -1, false
	}
	return c.Accuracy[band].FlatnessPct / 100, band, true
}

// accuracyRow returns the index of the first accuracy row matching the
// range and frequency, or -1.
func (c *Converter) accuracyRow(rangeIndex int, freqHz float64) int {
	if rangeIndex < 0 || rangeIndex >= len(c.Ranges) || math.IsNaN(freqHz) {
		return -1
	}
	for i, a := range c.Accuracy {
		if freqHz < a.FromHz || freqHz > a.ToHz {
			continue
		}
		match := len(a.Ranges) == 0
		for _, ix := range a.idx {
			match = match || ix == rangeIndex
		}
		if match {
			return i
		}
	}
	return -1
}

// validateSpec checks the specification components: each within 0..100 %
// and, on every accuracy row, their worst case (range gain + flatness +
// linearity at the bottom of the in-spec window, under_fraction) no more
// than the row's reading_pct they are part of.
func (c *Converter) validateSpec(p *problems) {
	if !finite(c.RangeGainPct) || c.RangeGainPct < 0 || c.RangeGainPct > 100 {
		p.add("range_gain_pct", c.RangeGainPct, "0 to 100 % of reading", "bad range-gain specification")
		return
	}
	if !finite(c.LinearityPct) || c.LinearityPct < 0 || c.LinearityPct > 100 {
		p.add("linearity_pct", c.LinearityPct, "0 to 100 % of full scale", "bad linearity specification")
		return
	}
	linPct := 4 * (1 - c.UnderFraction) * c.LinearityPct
	for i, a := range c.Accuracy {
		k := fmt.Sprintf("accuracy[%d].flatness_pct", i)
		if !finite(a.FlatnessPct) || a.FlatnessPct < 0 || a.FlatnessPct > 100 {
			p.add(k, a.FlatnessPct, "0 to 100 % of reading", "bad flatness specification")
			continue
		}
		if sum := c.RangeGainPct + a.FlatnessPct + linPct; sum > a.ReadingPct*(1+1e-9) {
			p.add(k, a.FlatnessPct, fmt.Sprintf("at most reading_pct (%g) − range_gain_pct (%g) − 4·(1 − under_fraction)·linearity_pct (%.4g)", a.ReadingPct, c.RangeGainPct, linPct),
				"the specification's components add up to more than the row's total")
		}
	}
}

// GeneratorAccuracy is a generator's amplitude specification: ±AmplitudePct
// % of the setting, common to every frequency, and the flatness by band
// relative to it.
type GeneratorAccuracy struct {
	// AmplitudePct is the amplitude accuracy, ± % of the setting (sine).
	AmplitudePct float64 `toml:"amplitude_pct"`
	// Flatness is the amplitude flatness by band; first matching row
	// wins.
	Flatness []GeneratorFlatness `toml:"flatness"`
}

// GeneratorFlatness is one band of a generator's flatness: ±FlatnessDB dB
// from FromHz to ToHz inclusive, common to every frequency in the band.
type GeneratorFlatness struct {
	FromHz     float64 `toml:"from_hz"`
	ToHz       float64 `toml:"to_hz"`
	FlatnessDB float64 `toml:"flatness_db"`
}

// maxGeneratorFlatnessDB bounds a flatness figure.
const maxGeneratorFlatnessDB = 6.0

func (g *Generator) validateSpec(p *problems) {
	a := g.Accuracy
	if a == nil {
		return
	}
	if !finite(a.AmplitudePct) || a.AmplitudePct < 0 || a.AmplitudePct > 100 {
		p.add("accuracy.amplitude_pct", a.AmplitudePct, "0 to 100 % of the setting", "bad amplitude specification")
	}
	for i, f := range a.Flatness {
		k := fmt.Sprintf("accuracy.flatness[%d]", i)
		if !finite(f.FromHz) || !finite(f.ToHz) || f.FromHz < 0 || f.ToHz <= f.FromHz {
			p.add(k+".to_hz", f.ToHz, fmt.Sprintf("above from_hz (%g)", f.FromHz), "bad frequency band")
		}
		if !finite(f.FlatnessDB) || f.FlatnessDB < 0 || f.FlatnessDB > maxGeneratorFlatnessDB {
			p.add(k+".flatness_db", f.FlatnessDB, fmt.Sprintf("0 to %g dB", maxGeneratorFlatnessDB), "bad flatness specification")
		}
	}
}

// AmplitudeRel returns the half-width of the generator's amplitude
// specification as a fraction of the setting (0 when the profile gives
// none). It is common to every frequency, so it cancels in a response
// taken relative to a reference frequency at one amplitude.
func (g *Generator) AmplitudeRel() float64 {
	if g.Accuracy == nil {
		return 0
	}
	return g.Accuracy.AmplitudePct / 100
}

// FlatnessRel returns the half-width of the generator's flatness at
// freqHz as a fraction of the amplitude (10^(dB/20) − 1, definition of the
// decibel), and the band: the index of the first flatness row holding
// freqHz. Frequencies in one band share one flatness error.
func (g *Generator) FlatnessRel(freqHz float64) (rel float64, band int, ok bool) {
	if g.Accuracy == nil || math.IsNaN(freqHz) {
		return 0, -1, false
	}
	for i, f := range g.Accuracy.Flatness {
		if freqHz >= f.FromHz && freqHz <= f.ToHz {
			return math.Pow(10, f.FlatnessDB/20) - 1, i, true
		}
	}
	return 0, -1, false
}
