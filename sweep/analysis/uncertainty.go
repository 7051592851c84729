package analysis

import (
	"math"

	"rolloff/sweep/point"
)

// CoverageFactor is the coverage factor k used for every expanded
// uncertainty the analysis reports (JCGM 100:2008 §6.2: k = 2 gives a
// coverage probability of about 95 % for a near-normal distribution).
const CoverageFactor = 2.0

// dbPerRel converts a small relative amplitude uncertainty to decibels:
// d(20·log10 v) = 20/ln(10) · dv/v.
const dbPerRel = 20 / math.Ln10

// Budget is the uncertainty budget of one point's gain, following
// JCGM 100:2008. The contributions are standard uncertainties, relative to
// the output voltage.
type Budget struct {
	// ConverterRel is the RMS converter's accuracy specification, taken as
	// a rectangular distribution of half-width point.ConvAccRel:
	// u = a/√3 (GUM §4.3.7).
	ConverterRel float64 `json:"converter_rel"`
	// VoltmeterRel is the DC voltmeter's specification in volts, made
	// relative by the DC reading (point.DCAccV/point.DCVolts), rectangular:
	// u = a/√3 (GUM §4.3.7). Zero when the point has no DC reading.
	VoltmeterRel float64 `json:"voltmeter_rel"`
	// TypeARel is the experimental standard deviation of the mean of the
	// readings (point.StdRel), a Type A evaluation (GUM §4.2).
	TypeARel float64 `json:"type_a_rel"`
	// CombinedRel is the root-sum-square of the three, the inputs being
	// uncorrelated (GUM §5.1.2).
	CombinedRel float64 `json:"combined_rel"`
	// CombinedDB is CombinedRel in decibels, 20/ln10 · CombinedRel.
	CombinedDB float64 `json:"combined_db"`
	// ExpandedDB is CoverageFactor · CombinedDB (GUM §6.2).
	ExpandedDB float64 `json:"expanded_db"`
}

// PointBudget returns the uncertainty budget of p's gain. The generator's
// amplitude is not part of it: it is the quantity a through (reference)
// run calibrates out. Negative or non-finite specifications count as zero.
func PointBudget(p point.Point) Budget {
	var b Budget
	b.ConverterRel = rect(p.ConvAccRel)
	if p.DCVolts > 0 && !math.IsInf(p.DCVolts, 0) {
		b.VoltmeterRel = rect(p.DCAccV / p.DCVolts)
	}
	if p.StdRel > 0 && !math.IsInf(p.StdRel, 0) {
		b.TypeARel = p.StdRel
	}
	b.CombinedRel = math.Sqrt(b.ConverterRel*b.ConverterRel + b.VoltmeterRel*b.VoltmeterRel + b.TypeARel*b.TypeARel)
	b.CombinedDB = dbPerRel * b.CombinedRel
	b.ExpandedDB = CoverageFactor * b.CombinedDB
	return b
}

// rect is the standard uncertainty of a rectangular distribution of
// half-width a (GUM §4.3.7).
func rect(a float64) float64 {
	if !(a > 0) || math.IsInf(a, 0) {
		return 0
	}
	return a / math.Sqrt(3)
}
