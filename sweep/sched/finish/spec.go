package finish

import (
	"math"

	"rolloff/driver/profile"
	"rolloff/sweep/analysis"
	"rolloff/sweep/plan"
)

// SpecOf returns the measuring chain's specification by component for the
// corner budgets: the converter's range gain, flatness bands and
// linearity, the generator's amplitude and flatness (unless the bench
// measures Vin), from the bench file's resolved profiles; the settling
// tolerance from the plan. Nil when the bench has no converter profile
// (an AC DMM bench, or none): the budget then uses the points' own
// figures.
func SpecOf(b *profile.BenchFile, p *plan.Plan) *analysis.Spec {
	if b == nil || b.Converter == nil || b.Converter.Spec == nil {
		return nil
	}
	c := b.Converter.Spec
	s := &analysis.Spec{
		ConverterRangeGainRel: c.RangeGainRel(),
		ConverterLinearityFS:  c.LinearityFS(),
		VinMeasured:           b.Vin != nil,
	}
	for _, a := range c.Accuracy {
		band := analysis.SpecBand{FromHz: a.FromHz, ToHz: a.ToHz, Rel: a.FlatnessPct / 100}
		for _, name := range a.Ranges {
			for j, r := range c.Ranges {
				if r.Name == name {
					band.Ranges = append(band.Ranges, j)
				}
			}
		}
		s.ConverterFlatness = append(s.ConverterFlatness, band)
	}
	if g := b.Generator; g != nil && g.Generator != nil {
		s.GeneratorAmplitudeRel = g.Generator.AmplitudeRel()
		if acc := g.Generator.Accuracy; acc != nil {
			for _, f := range acc.Flatness {
				// A ±dB figure as a fraction of the amplitude (definition
				// of the decibel), as profile.Generator.FlatnessRel.
				rel := math.Pow(10, f.FlatnessDB/20) - 1
				s.GeneratorFlatness = append(s.GeneratorFlatness, analysis.SpecBand{FromHz: f.FromHz, ToHz: f.ToHz, Rel: rel})
			}
		}
	}
	if p != nil {
		s.SettleTolRel = p.Settle.Tolerance
	}
	return s
}
