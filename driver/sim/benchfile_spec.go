package sim

import "rolloff/driver/profile"

// syncSpec takes the specifications the systematic errors are drawn from
// out of the profiles where [sim.spec] is silent: the converter's
// range_gain_pct, linearity_pct and accuracy[].flatness_pct, the DC
// voltmeter's dc.accuracy and the generator's [accuracy]. A profile that
// states no figure gives the simulated instrument no error there, so the
// simulator never assumes a figure the uncertainty budget cannot see.
func syncSpec(b *profile.BenchFile, c *Config) {
	listed := b.Listed
	if conv := b.Converter; conv != nil && conv.Spec != nil {
		cs, s := conv.Spec, &c.Spec.Converter
		if !listed("sim.spec.converter.range_gain_pct") {
			s.RangeGainPct = cs.RangeGainPct
		}
		if !listed("sim.spec.converter.linearity_pct") {
			s.LinearityPct = cs.LinearityPct
		}
		if !listed("sim.spec.converter.flatness") {
			s.Flatness = nil
			for _, a := range cs.Accuracy {
				s.Flatness = append(s.Flatness, ConverterBand{
					Ranges: append([]string(nil), a.Ranges...), FromHz: a.FromHz, ToHz: a.ToHz, FlatnessPct: a.FlatnessPct,
				})
			}
		}
	}
	if v := b.Voltmeter; v != nil && v.DMM != nil && !listed("sim.spec.voltmeter.accuracy") {
		c.Spec.Voltmeter.Accuracy = nil
		for _, a := range v.DMM.DC.Accuracy {
			c.Spec.Voltmeter.Accuracy = append(c.Spec.Voltmeter.Accuracy, DCAccuracy{RangeV: a.RangeV, ReadingPct: a.ReadingPct, RangePct: a.RangePct})
		}
	}
	if g := b.Generator; g != nil && g.Generator != nil {
		ga, s := g.Generator.Accuracy, &c.Spec.Generator
		if !listed("sim.spec.generator.amplitude_pct") {
			s.AmplitudePct = 0
			if ga != nil {
				s.AmplitudePct = ga.AmplitudePct
			}
		}
		if !listed("sim.spec.generator.flatness") {
			s.Flatness = nil
			if ga != nil {
				for _, f := range ga.Flatness {
					s.Flatness = append(s.Flatness, GeneratorBand{FromHz: f.FromHz, ToHz: f.ToHz, FlatnessDB: f.FlatnessDB})
				}
			}
		}
	}
}
