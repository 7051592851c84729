package profile

import (
	"fmt"
	"sort"
)

// ACFilter is an AC meter's RMS settling on one frequency band: from
// FromHz up to the next band's FromHz, the reading follows a change of
// its input as a first-order average of the mean square of time constant
// TimeConstantS (the meter's "filter", slower at low frequencies where
// the ripple needs it). The sweep waits for it instead of a converter's.
//
//	[[ac.filters]]
//	from_hz = 3
//	time_constant_s = 0.5
//	[[ac.filters]]
//	from_hz = 20
//	time_constant_s = 0.05
type ACFilter struct {
	FromHz        float64 `toml:"from_hz"`
	TimeConstantS float64 `toml:"time_constant_s"`
}

// validateTiming checks ac.fixed_aperture_s and ac.filters.
func (ac *DMMAC) validateTiming(p *problems) {
	settable := len(ac.NPLC) > 0 || ac.MaxApertureS > 0
	if ac.FixedApertureS != 0 {
		if settable {
			p.add("ac.fixed_aperture_s", ac.FixedApertureS, "absent: ac.nplc or ac.max_aperture_s set the integration time", "fixed aperture on a settable meter")
		} else if !finite(ac.FixedApertureS) || ac.FixedApertureS < 0 || ac.FixedApertureS > 100 {
			p.add("ac.fixed_aperture_s", ac.FixedApertureS, "the meter's own integration time, more than 0, at most 100 s", "bad fixed aperture")
		}
	}
	for i, f := range ac.Filters {
		k := fmt.Sprintf("ac.filters[%d]", i)
		if !finite(f.FromHz) || f.FromHz < 0 || f.FromHz > maxProfileFreqHz {
			p.add(k+".from_hz", f.FromHz, fmt.Sprintf("0 to %g Hz", maxProfileFreqHz), "bad band")
		}
		if !finite(f.TimeConstantS) || f.TimeConstantS <= 0 || f.TimeConstantS > 100 {
			p.add(k+".time_constant_s", f.TimeConstantS, "more than 0, at most 100 s", "bad settling time constant")
		}
	}
	if !sort.SliceIsSorted(ac.Filters, func(i, j int) bool { return ac.Filters[i].FromHz < ac.Filters[j].FromHz }) {
		p.add("ac.filters", nil, "bands in ascending from_hz", "bands not ascending")
	}
	for i := 1; i < len(ac.Filters); i++ {
		if ac.Filters[i].FromHz == ac.Filters[i-1].FromHz {
			p.add(fmt.Sprintf("ac.filters[%d].from_hz", i), ac.Filters[i].FromHz, "distinct from the band before", "two bands from one frequency")
		}
	}
}

// SettleTauS returns the meter's settling time constant at freqHz,
// seconds: the band's it falls in (below the first band, the first's); 0
// when the profile gives no filters.
func (ac *DMMAC) SettleTauS(freqHz float64) float64 {
	tau := 0.0
	for i, f := range ac.Filters {
		if i == 0 || freqHz >= f.FromHz {
			tau = f.TimeConstantS
		}
	}
	return tau
}
