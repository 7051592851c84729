package driver

import (
	"context"
	"fmt"
)

// Range is one range of an analog true-RMS converter.
type Range struct {
	Name          string  `json:"name"`            // as printed on the range switch, e.g. "31.62 mV"
	FullScaleVrms float64 `json:"full_scale_vrms"` // input for a full-scale reading
	TimeConstantS float64 `json:"time_constant_s"` // averaging time constant, physical seconds
}

// Window is the converter's in-spec window and output scaling.
type Window struct {
	DCFullScaleV  float64 `json:"dc_full_scale_v"` // DC output at full scale, typically 1 V
	UnderFraction float64 `json:"under_fraction"`  // readings below this fraction of full scale are out of spec
	OverFraction  float64 `json:"over_fraction"`   // readings above this fraction are over-range
	MaxFreqHz     float64 `json:"max_freq_hz"`     // the converter's frequency limit
}

// Status says where a reading falls in the in-spec window.
type Status int

const (
	InSpec Status = iota
	UnderRange
	OverRange
)

// String returns "in-spec", "under-range" or "over-range".
func (s Status) String() string {
	switch s {
	case InSpec:
		return "in-spec"
	case UnderRange:
		return "under-range"
	case OverRange:
		return "over-range"
	}
	return fmt.Sprintf("Status(%d)", int(s))
}

// ConverterReading is a DC output reading scaled to the selected range.
type ConverterReading struct {
	Vrms       float64 `json:"vrms"`
	FractionFS float64 `json:"fraction_fs"`
	Status     Status  `json:"status"`
}

// Converter is an analog true-RMS voltmeter used as a converter: it has no
// SCPI of its own and no autorange. The sweep keeps track of the selected
// range; Scale turns a DC output reading into Vrms on that range and says
// whether it is in spec.
type Converter interface {
	Ranges() []Range
	Window() Window
	Scale(rangeIndex int, dcVolts float64) (ConverterReading, error)
}

// RangeSwitcher is an optional capability of a Converter whose range is
// selected remotely through a SCPI-driven switch or relay instrument.
type RangeSwitcher interface {
	SwitchRange(ctx context.Context, rangeIndex int) error
}

// AccuracySpec is an optional capability of a Converter: the half-width of
// its accuracy specification, as a fraction of the reading, for a range and
// frequency (treated as a rectangular distribution, JCGM 100:2008 §4.3.7).
// ok is false where the specification says nothing.
type AccuracySpec interface {
	AccuracyRel(rangeIndex int, freqHz float64) (rel float64, ok bool)
}

// DCAccuracySpec is an optional capability of a DCVoltmeter: the half-width
// of its DC specification in volts for a reading on a range.
type DCAccuracySpec interface {
	DCAccuracyV(readingV, rangeV float64) float64
}
