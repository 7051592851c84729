package batch

import (
	"math"
	"sort"

	"rolloff/sweep/analysis"
)

// Limits are the specification limits of the figures, derived from a
// mask (nil where the mask sets none).
//
// For the corners: where the mask's lower line lies above the corner
// level, every passing unit's gain is above the level, so the corner must
// lie beyond that frequency; where the upper line lies below the level,
// the gain is below it, so the corner must lie before. Above the
// reference frequency this gives the high corner's LSL (the highest
// frequency where the lower line is above the level) and USL (the lowest
// where the upper line is below it); below the reference, mirrored, the
// low corner's USL and LSL. For a relative mask the level is the corner
// level (e.g. −3.0103 dB); for an absolute one the mean of the units'
// corner gains. Peaking is held to the highest value of a relative
// mask's upper line, and, for an absolute mask, the reference gain to the
// two lines at the reference frequency.
type Limits struct {
	LowLSL, LowUSL, HighLSL, HighUSL *float64
	PeakingUSL                       *float64
	RefLSL, RefUSL                   *float64
	CornerNote, PeakingNote, RefNote string
}

// DeriveLimits derives the limits of b's figures from its mask, at the
// units' median reference frequency and their corner level.
func DeriveLimits(b *Batch) Limits {
	var l Limits
	m := b.Mask
	if m == nil {
		l.CornerNote, l.PeakingNote, l.RefNote = "no mask", "no mask", "no mask"
		return l
	}
	var refs, levels, thresholds []float64
	for _, u := range b.Units {
		if r := u.In.Result; r != nil {
			refs = append(refs, r.ReferenceHz)
			levels = append(levels, r.LevelDB)
			thresholds = append(thresholds, r.ThresholdDB)
		}
	}
	if len(refs) == 0 {
		l.CornerNote, l.PeakingNote, l.RefNote = "no unit analysed", "no unit analysed", "no unit analysed"
		return l
	}
	fr := medianOf(refs)
	level := medianOf(levels)
	if !m.Relative {
		level = Summarize(thresholds).Mean
	}
	return limitsFor(m, fr, level)
}

// limitsFor derives the limits from mask m at reference frequency fr and
// corner level (relative or absolute, as the mask is).
func limitsFor(m *analysis.Mask, fr, level float64) Limits {
	var l Limits
	above := func(g float64) bool { return g > level }
	below := func(g float64) bool { return g < level }
	l.HighLSL = edge(m.Lower, fr, math.Inf(1), above, true)
	l.HighUSL = edge(m.Upper, fr, math.Inf(1), below, false)
	l.LowUSL = edge(m.Lower, 0, fr, above, false)
	l.LowLSL = edge(m.Upper, 0, fr, below, true)
	l.CornerNote = "from the mask lines' crossings of the corner level"
	if m.Relative {
		if len(m.Upper) > 0 {
			u := math.Inf(-1)
			for _, v := range m.Upper {
				u = math.Max(u, v[1])
			}
			l.PeakingUSL = ptr(u)
			l.PeakingNote = "the highest value of the mask's upper line"
		} else {
			l.PeakingNote = "the mask has no upper line"
		}
		l.RefNote = "a relative mask does not limit the reference gain"
	} else {
		if v, ok := m.LowerAt(fr); ok {
			l.RefLSL = ptr(v)
		}
		if v, ok := m.UpperAt(fr); ok {
			l.RefUSL = ptr(v)
		}
		l.PeakingNote = "an absolute mask limits the gain, not the peaking"
		l.RefNote = "the mask lines at the reference frequency"
	}
	return l
}

// edge returns the highest (last) or lowest frequency in [lo, hi] at which
// the limit line, linear in log frequency between its vertices, satisfies
// in (a strict inequality against a level); nil when it nowhere does. The
// set where a linear segment satisfies it is an interval, found exactly.
func edge(line [][2]float64, lo, hi float64, in func(g float64) bool, last bool) *float64 {
	var best *float64
	take := func(x float64) {
		f := math.Pow(10, x)
		if best == nil || last && f > *best || !last && f < *best {
			best = ptr(f)
		}
	}
	xlo, xhi := math.Inf(-1), math.Inf(1)
	if lo > 0 {
		xlo = math.Log10(lo)
	}
	if !math.IsInf(hi, 1) {
		xhi = math.Log10(hi)
	}
	for i := 1; i < len(line); i++ {
		a, b := line[i-1], line[i]
		if a[0] == b[0] {
			continue // a vertical step: its ends belong to the segments around it
		}
		xa, xb := math.Log10(a[0]), math.Log10(b[0])
		ga, gb := a[1], b[1]
		// The sub-interval [s, e] of [xa, xb] where in holds.
		s, e := xa, xb
		switch ia, ib := in(ga), in(gb); {
		case ia && ib:
		case !ia && !ib:
			// A linear function satisfying a strict inequality at
			// neither end satisfies it nowhere between.
			continue
		default:
			// in holds on one side of the crossing of the level; find it
			// by solving on the segment.
			xc := xa + crossing(ga, gb, in)*(xb-xa)
			if ia {
				e = xc
			} else {
				s = xc
			}
		}
		s, e = math.Max(s, xlo), math.Min(e, xhi)
		if s > e {
			continue
		}
		if last {
			take(e)
		} else {
			take(s)
		}
	}
	return best
}

// crossing returns t in [0, 1] where ga + t·(gb − ga) leaves or enters
// the set where in holds, by bisection (in is a threshold test, so the
// boundary is unique on a linear segment).
func crossing(ga, gb float64, in func(g float64) bool) float64 {
	lo, hi := 0.0, 1.0
	inLo := in(ga)
	for range 60 {
		mid := (lo + hi) / 2
		if in(ga+mid*(gb-ga)) == inLo {
			lo = mid
		} else {
			hi = mid
		}
	}
	return (lo + hi) / 2
}

func medianOf(v []float64) float64 {
	s := append([]float64(nil), v...)
	sort.Float64s(s)
	n := len(s)
	if n%2 == 1 {
		return s[n/2]
	}
	return (s[n/2-1] + s[n/2]) / 2
}
