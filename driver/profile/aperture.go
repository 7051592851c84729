package profile

import "fmt"

// validateFixedAperture checks sect.fixed_aperture_s: required when the
// meter cannot set its integration time (settable false), refused when it
// can (the value set is the one that counts).
func validateFixedAperture(p *problems, sect string, fixedS float64, settable bool) {
	key := sect + ".fixed_aperture_s"
	switch {
	case settable && fixedS != 0:
		p.add(key, fixedS, fmt.Sprintf("absent: %s.nplc or %s.max_aperture_s set the integration time", sect, sect), "fixed aperture on a settable meter")
	case !settable && (!finite(fixedS) || fixedS <= 0 || fixedS > 100):
		p.add(key, fixedS, fmt.Sprintf("the meter's own integration time, more than 0, at most 100 s (%s has no nplc and no aperture bounds)", sect), "missing fixed aperture")
	}
}

// SettableNPLC reports whether the DC function can set its integration
// time in power-line cycles.
func (d *DMMDC) SettableNPLC() bool { return len(d.NPLC) > 0 }

// DefaultNPLC returns the integration time a bench uses when it names
// none: 1 NPLC where the profile lists it (whole line cycles reject mains
// hum, common practice), else the shortest listed above 1, else the
// longest; 0 (the instrument's own) where the profile cannot set NPLC.
func DefaultNPLC(nplcs []float64) float64 {
	if len(nplcs) == 0 {
		return 0
	}
	for _, n := range nplcs {
		if n >= 1 {
			return n
		}
	}
	return nplcs[len(nplcs)-1]
}
