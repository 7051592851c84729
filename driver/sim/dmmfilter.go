package sim

import (
	"fmt"
	"math"
)

// DMMFilter is the simulated DMM's RMS averaging on one frequency band:
// from FromHz up to the next band's, the time constant TimeConstantS
// (the dmm.filters list; empty: dmm.time_constant_s at every frequency).
// A bench file's DMM profile with ac.filters gives them unless [sim]
// lists its own.
type DMMFilter struct {
	FromHz        float64 `toml:"from_hz"`
	TimeConstantS float64 `toml:"time_constant_s"`
}

// tauAt returns the DMM's averaging time constant for a signal at freqHz.
func (c *DMMConfig) tauAt(freqHz float64) float64 {
	tau := c.TimeConstantS
	for i, f := range c.Filters {
		if i == 0 || freqHz >= f.FromHz {
			tau = f.TimeConstantS
		}
	}
	return tau
}

// validateFilters checks dmm.filters.
func (c *DMMConfig) validateFilters(bad func(key string, v any, allowed string)) {
	for i, f := range c.Filters {
		k := fmt.Sprintf("dmm.filters[%d]", i)
		if math.IsNaN(f.FromHz) || math.IsInf(f.FromHz, 0) || f.FromHz < 0 || (i > 0 && f.FromHz <= c.Filters[i-1].FromHz) {
			bad(k+".from_hz", f.FromHz, "0 or more, ascending")
		}
		if math.IsNaN(f.TimeConstantS) || f.TimeConstantS <= 0 || f.TimeConstantS > 1000 {
			bad(k+".time_constant_s", f.TimeConstantS, "more than 0, at most 1000 s")
		}
	}
}
