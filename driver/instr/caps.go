package instr

// MaxBurst returns the longest burst the voltmeter takes, the profile's
// max_samples (1: no bursts, every reading one query).
func (v *DCVoltmeter) MaxBurst() int { return v.p.MaxSamples }

// SettleTauS returns the meter's own RMS settling time constant at
// freqHz, seconds, from the profile's ac.filters (0: not stated).
func (a *ACVoltmeter) SettleTauS(freqHz float64) float64 { return a.p.AC.SettleTauS(freqHz) }

// AutoRange reports whether the profile can select autorange.
func (a *ACVoltmeter) AutoRange() bool { return a.p.T.ACSetAutoRange != nil }

// RangesVrms returns the AC ranges, full scale Vrms, ascending, and how
// far past full scale a range reads (a multiple, 1 or more).
func (a *ACVoltmeter) RangesVrms() (ranges []float64, headroom float64) {
	return a.p.AC.RangesVrms, a.p.RangeHeadroom
}
