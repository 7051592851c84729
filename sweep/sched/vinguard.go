package sched

import (
	"fmt"

	"rolloff/driver"
)

// vinLimitSlack is the relative slack on the bench limit for a measured
// Vin: floating-point rounding only, so that a level set exactly at the
// limit and read back exactly is not refused.
const vinLimitSlack = 1e-9

// checkVin stops the run when the Vin channel measured more than the
// bench's amplitude limit at the DUT input: the generator output goes
// off at once (before anything else is sent) and the error names the
// measured value. It wraps driver.ErrOverLimit, which is not transient.
func (s *sweeper) checkVin(vrms float64) error {
	lim := s.inst.Limits.MaxVrms
	if lim <= 0 && s.inst.Generator != nil {
		lim = s.inst.Generator.Limits().MaxVrms
	}
	if !(lim > 0) || vrms <= lim*(1+vinLimitSlack) {
		return nil
	}
	herr := s.r.haltOnce()
	s.bench.outputOn = false
	msg := fmt.Sprintf("sched: measured Vin %.6g Vrms at the DUT input is above limits.max_vrms %g Vrms (set %.6g Vrms): generator output switched off", vrms, lim, s.bench.ampVrms)
	if herr != nil {
		msg += "; switching it off failed: " + herr.Error()
	}
	s.r.logEvent(msg)
	return fmt.Errorf("%s: %w", msg, driver.ErrOverLimit)
}
