package analysis

import (
	"fmt"
	"math"
	"sort"

	"rolloff/sweep/point"
)

// Exclusion reasons the analysis adds to a point's own flags.
const (
	ReasonBadFrequency   = "bad-frequency"   // frequency not positive and finite
	ReasonNoGain         = "no-gain"         // neither a voltage ratio nor a finite gain_db
	ReasonOutsideThrough = "outside-through" // no through-run coverage at this frequency
)

// Sample is one point of the response as the analysis sees it.
type Sample struct {
	Pos    int     // the point's position in the slice given to Analyze
	Seq    int     // the point's Seq
	FreqHz float64 // frequency, Hz
	// GainDB is the gain in dB: 20·log10(Vout/Vin) (or the point's
	// gain_db when it has no voltages), less the through run's gain when
	// one was given.
	GainDB float64
	// MeasuredDB is the gain before through normalisation.
	MeasuredDB float64
	// UDB is the combined standard uncertainty of GainDB, dB (k = 1),
	// including the through run's when normalised.
	UDB float64
	// UADB is its Type A part (scatter of the readings), dB.
	UADB float64
	// Excluded is set for points the fit and figures leave out; Reasons
	// says why (the point's flags and the analysis' own reasons).
	Excluded bool
	Reasons  []string
}

// GainOf returns the gain of p in dB: from the voltages when both are
// positive and finite, otherwise the stored GainDB. ok is false when
// neither is usable.
func GainOf(p point.Point) (gainDB float64, ok bool) {
	if p.VinVrms > 0 && p.VoutVrms > 0 && !math.IsInf(p.VinVrms, 0) && !math.IsInf(p.VoutVrms, 0) {
		return 20 * math.Log10(p.VoutVrms/p.VinVrms), true
	}
	if !math.IsNaN(p.GainDB) && !math.IsInf(p.GainDB, 0) && (p.GainDB != 0 || p.VinVrms == 0 && p.VoutVrms == 0) {
		return p.GainDB, true
	}
	return math.NaN(), false
}

// BuildSamples converts points to samples sorted by frequency, applying the
// through normalisation when through is non-empty. Flagged points are kept
// and marked Excluded.
func BuildSamples(pts, through []point.Point) ([]Sample, error) {
	var thr *Interpolant
	var thrU []float64
	var thrX []float64
	if len(through) > 0 {
		ts := make([]Sample, 0, len(through))
		for _, p := range through {
			s := sampleOf(p)
			if !s.Excluded {
				ts = append(ts, s)
			}
		}
		ts = mergeSameFrequency(sortSamples(ts))
		if len(ts) < 2 {
			return nil, fmt.Errorf("%w: through run has %d usable points: want at least 2", ErrResponse, len(ts))
		}
		xs := make([]float64, len(ts))
		ys := make([]float64, len(ts))
		thrU = make([]float64, len(ts))
		for i, s := range ts {
			xs[i], ys[i], thrU[i] = math.Log10(s.FreqHz), s.GainDB, s.UDB
		}
		var err error
		thr, err = newInterpolantLog(xs, ys)
		if err != nil {
			return nil, fmt.Errorf("through run: %w", err)
		}
		thrX = xs
	}
	out := make([]Sample, 0, len(pts))
	for i, p := range pts {
		s := sampleOf(p)
		s.Pos = i
		if thr != nil && !s.Excluded {
			x := math.Log10(s.FreqHz)
			const tol = 1e-9
			if x < thrX[0]-tol || x > thrX[len(thrX)-1]+tol {
				s.Excluded = true
				s.Reasons = append(s.Reasons, ReasonOutsideThrough)
			} else {
				x = clamp(x, thrX[0], thrX[len(thrX)-1])
				s.GainDB -= thr.atLog(x)
				u := linearAt(thrX, thrU, x)
				s.UDB = math.Hypot(s.UDB, u)
			}
		}
		out = append(out, s)
	}
	return sortSamples(out), nil
}

func sampleOf(p point.Point) Sample {
	s := Sample{Seq: p.Seq, FreqHz: p.FreqHz}
	b := PointBudget(p)
	s.UDB = b.CombinedDB
	s.UADB = dbPerRel * b.TypeARel
	for _, f := range p.Flags {
		switch f {
		case point.FlagUnderRange, point.FlagOverRange, point.FlagUnsettled, point.FlagClipped, point.FlagBeyondBand, point.FlagDriftCheck:
			s.Reasons = append(s.Reasons, f)
		}
	}
	s.Excluded = p.Excluded()
	if !(p.FreqHz > 0) || math.IsInf(p.FreqHz, 0) {
		s.Excluded = true
		s.Reasons = append(s.Reasons, ReasonBadFrequency)
	}
	g, ok := GainOf(p)
	if !ok {
		s.Excluded = true
		s.Reasons = append(s.Reasons, ReasonNoGain)
	}
	s.GainDB, s.MeasuredDB = g, g
	return s
}

func sortSamples(s []Sample) []Sample {
	sort.SliceStable(s, func(i, j int) bool {
		a, b := s[i].FreqHz, s[j].FreqHz
		if math.IsNaN(a) || math.IsNaN(b) {
			return !math.IsNaN(a) && math.IsNaN(b)
		}
		return a < b
	})
	return s
}

// mergeSameFrequency averages included samples at exactly the same
// frequency (a re-measured point): gains and Type B parts are averaged, the
// Type A part divided by √m. Input must be sorted and contain only
// included samples.
func mergeSameFrequency(s []Sample) []Sample {
	out := s[:0]
	for i := 0; i < len(s); {
		j := i + 1
		for j < len(s) && s[j].FreqHz == s[i].FreqHz {
			j++
		}
		if j == i+1 {
			out = append(out, s[i])
			i = j
			continue
		}
		m := float64(j - i)
		var g, gm, ub2, ua2 float64
		for _, t := range s[i:j] {
			g += t.GainDB
			gm += t.MeasuredDB
			ua2 += t.UADB * t.UADB
			ub2 += t.UDB*t.UDB - t.UADB*t.UADB
		}
		r := s[i]
		r.GainDB, r.MeasuredDB = g/m, gm/m
		r.UADB = math.Sqrt(ua2/m) / math.Sqrt(m)
		r.UDB = math.Sqrt(math.Max(ub2/m, 0) + r.UADB*r.UADB)
		out = append(out, r)
		i = j
	}
	return out
}

// linearAt interpolates ys linearly at x (xs sorted), clamping at the ends.
func linearAt(xs, ys []float64, x float64) float64 {
	n := len(xs)
	if n == 0 {
		return math.NaN()
	}
	if x <= xs[0] {
		return ys[0]
	}
	if x >= xs[n-1] {
		return ys[n-1]
	}
	i := sort.SearchFloat64s(xs, x)
	if xs[i] == x {
		return ys[i]
	}
	t := (x - xs[i-1]) / (xs[i] - xs[i-1])
	return ys[i-1] + t*(ys[i]-ys[i-1])
}

func clamp(x, lo, hi float64) float64 { return math.Max(lo, math.Min(hi, x)) }
