package instr

// MaxBurst returns the longest burst the voltmeter takes, the profile's
// max_samples (1: no bursts, every reading one query).
func (v *DCVoltmeter) MaxBurst() int { return v.p.MaxSamples }
