package batch

import (
	"math"

	"gonum.org/v1/gonum/stat"

	"rolloff/sweep/analysis"
)

// Stats sums up one figure across the units that have it.
type Stats struct {
	N int
	// Mean, SD (the sample standard deviation, n − 1 in the denominator),
	// Min and Max of the values; SD is NaN for fewer than two values.
	Mean, SD, Min, Max float64
}

// Summarize returns the statistics of the finite values in vs.
func Summarize(vs []float64) Stats {
	var xs []float64
	for _, v := range vs {
		if !math.IsNaN(v) && !math.IsInf(v, 0) {
			xs = append(xs, v)
		}
	}
	s := Stats{N: len(xs), Mean: math.NaN(), SD: math.NaN(), Min: math.NaN(), Max: math.NaN()}
	if len(xs) == 0 {
		return s
	}
	s.Min, s.Max = math.Inf(1), math.Inf(-1)
	for _, x := range xs {
		s.Min, s.Max = math.Min(s.Min, x), math.Max(s.Max, x)
	}
	if len(xs) == 1 {
		s.Mean = xs[0]
		return s
	}
	s.Mean, s.SD = stat.MeanStdDev(xs, nil) // unbiased: n − 1
	return s
}

// CpkSource names the published source of the Cpk formula.
const CpkSource = "NIST/SEMATECH e-Handbook of Statistical Methods, §6.1.6 (process capability)"

// Cpk is the process capability index of a figure with mean and
// standard deviation sd against its limits (nil: no limit on that side):
//
//	Cpk = min(USL − mean, mean − LSL) / (3·sd)
//
// and with one limit the one-sided index of that side, Cpu =
// (USL − mean)/(3·sd) or Cpl = (mean − LSL)/(3·sd) (CpkSource). ok is
// false without a limit or without a positive finite sd.
func Cpk(mean, sd float64, lsl, usl *float64) (cpk float64, ok bool) {
	if !(sd > 0) || math.IsInf(sd, 0) || math.IsNaN(mean) || (lsl == nil && usl == nil) {
		return math.NaN(), false
	}
	cpk = math.Inf(1)
	if usl != nil {
		cpk = math.Min(cpk, (*usl-mean)/(3*sd))
	}
	if lsl != nil {
		cpk = math.Min(cpk, (mean-*lsl)/(3*sd))
	}
	return cpk, true
}

// Figure is one figure across the units.
type Figure struct {
	Name string // "low corner", "high corner", "peaking", "worst margin", "reference gain"
	Unit string // "Hz" or "dB"
	// Values holds each unit's value in Batch.Units order (NaN where the
	// unit has none).
	Values []float64
	// LSL and USL are the limits derived from the mask (nil: none);
	// LimitNote says how.
	LSL, USL  *float64
	LimitNote string
	Stats     Stats
	Cpk       float64 // NaN when it cannot be computed
}

// figures computes every figure of b with its limits.
func figures(b *Batch) []Figure {
	n := len(b.Units)
	val := func(get func(r *analysis.Result) *float64) []float64 {
		vs := make([]float64, n)
		for i, u := range b.Units {
			vs[i] = math.NaN()
			if r := u.In.Result; r != nil {
				if p := get(r); p != nil {
					vs[i] = *p
				}
			}
		}
		return vs
	}
	lim := DeriveLimits(b)
	fs := []Figure{
		{Name: "low corner", Unit: "Hz", Values: val(func(r *analysis.Result) *float64 { return r.LowHz }), LSL: lim.LowLSL, USL: lim.LowUSL, LimitNote: lim.CornerNote},
		{Name: "high corner", Unit: "Hz", Values: val(func(r *analysis.Result) *float64 { return r.HighHz }), LSL: lim.HighLSL, USL: lim.HighUSL, LimitNote: lim.CornerNote},
		{Name: "peaking", Unit: "dB", Values: val(func(r *analysis.Result) *float64 { return &r.PeakingDB }), USL: lim.PeakingUSL, LimitNote: lim.PeakingNote},
		{Name: "reference gain", Unit: "dB", Values: val(func(r *analysis.Result) *float64 { return &r.ReferenceGainDB }), LSL: lim.RefLSL, USL: lim.RefUSL, LimitNote: lim.RefNote},
	}
	if b.Mask != nil {
		fs = append(fs, Figure{Name: "worst margin", Unit: "dB", Values: val(func(r *analysis.Result) *float64 {
			if r.Mask == nil {
				return nil
			}
			return r.Mask.WorstMarginDB
		}), LSL: ptr(0), LimitNote: "a point inside the mask has a margin of 0 dB or more"})
	}
	for i := range fs {
		f := &fs[i]
		f.Stats = Summarize(f.Values)
		f.Cpk, _ = Cpk(f.Stats.Mean, f.Stats.SD, f.LSL, f.USL)
	}
	return fs
}
