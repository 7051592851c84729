// Package point is the record of one measured frequency point, shared by
// the scheduler, the run store, the analysis, the exports and the web page.
package point

import "time"

// Flags a point can carry. A flagged point is kept and shown, but the
// analysis excludes it from fits and figures.
const (
	FlagUnderRange = "under-range" // reading below the converter's in-spec fraction
	FlagOverRange  = "over-range"  // reading above the converter's over-range threshold
	FlagUnsettled  = "unsettled"   // readings did not converge before the point's time-out
	FlagClipped    = "clipped"     // the voltmeter reported overload (SCPI 9.9E37)
	FlagRefined    = "refined"     // added by corner refinement (informational, not excluded)
	// FlagBeyondBand marks a point above the converter's frequency limit,
	// where its reading is outside the specification.
	FlagBeyondBand = "beyond-converter-band"
	// FlagDriftCheck marks a re-measurement of the reference frequency
	// for the drift check: not part of the response.
	FlagDriftCheck = "drift-check"
)

// Settle modes a point's record carries (Point.Settle) where the plan
// predicts settled values.
const (
	SettlePredicted = "predicted" // ended on the value its approach predicts
	SettleWaited    = "waited"    // the prediction was given up: waited to settle
)

// Point is one measured frequency point.
type Point struct {
	Seq      int     `json:"seq"`   // 0-based order of measurement in the run
	Index    int     `json:"index"` // index in the plan (refined points get indices past the plan's)
	FreqHz   float64 `json:"freq_hz"`
	VinVrms  float64 `json:"vin_vrms"`  // generator setting, or measured by a second channel
	VoutVrms float64 `json:"vout_vrms"` // DUT output, from the converter reading
	// GainDB is 20·log10(VoutVrms/VinVrms); stored so that a file is
	// readable without recomputation.
	GainDB float64 `json:"gain_db"`

	DCVolts     float64 `json:"dc_v"`          // mean DC output reading, volts
	RangeIndex  int     `json:"range_index"`   // converter range used
	Range       string  `json:"range"`         // its name
	RangeFSVrms float64 `json:"range_fs_vrms"` // its full scale
	FractionFS  float64 `json:"fraction_fs"`   // reading as a fraction of full scale
	Readings    int     `json:"readings"`      // readings averaged
	StdRel      float64 `json:"std_rel"`       // experimental standard deviation of the mean, relative (Type A)
	ConvAccRel  float64 `json:"conv_acc_rel"`  // converter spec half-width, relative (rectangular)
	DCAccV      float64 `json:"dc_acc_v"`      // voltmeter DC spec half-width, volts (rectangular)
	SettleS     float64 `json:"settle_s"`      // physical seconds from setting the frequency to the accepted reading
	// RippleRel is the amplitude of the converter's residual 2f ripple
	// left in one reading by the aperture chosen, relative (0: none
	// stated).
	RippleRel float64 `json:"ripple_rel,omitempty"`
	// SettleResidualRel bounds what is left of the converter's approach
	// in the point's reading, relative: the approach the converter's
	// model gives from its state before the step, with its time constant
	// taken 20 % longer than stated, capped at the settle tolerance. Nil
	// where no model was known (the tolerance bounds it).
	SettleResidualRel *float64 `json:"settle_residual_rel,omitempty"`
	// Settle is how the point's value was had where the plan predicts
	// settled values: SettlePredicted from the converter's approach, or
	// SettleWaited for it to settle, SettleWhy then saying why the
	// prediction was given up. Empty where no prediction was tried.
	Settle    string `json:"settle,omitempty"`
	SettleWhy string `json:"settle_why,omitempty"`
	// TauS is the converter's time constant the predicted approach
	// showed, physical seconds (0: not predicted).
	TauS  float64   `json:"tau_s,omitempty"`
	Flags []string  `json:"flags,omitempty"`
	Time  time.Time `json:"time"`
}

// Has reports whether p carries flag f.
func (p Point) Has(f string) bool {
	for _, g := range p.Flags {
		if g == f {
			return true
		}
	}
	return false
}

// Excluded reports whether the analysis must leave p out of fits and
// figures: it is under-range, over-range, clipped, unsettled, beyond the
// converter's frequency limit or a drift check.
func (p Point) Excluded() bool {
	return p.Has(FlagUnderRange) || p.Has(FlagOverRange) || p.Has(FlagUnsettled) || p.Has(FlagClipped) || p.Has(FlagBeyondBand) || p.Has(FlagDriftCheck)
}
