package model

import (
	"math"
	"math/cmplx"
	"sort"
)

// segment is the averager between two events: a constant input series,
// time constant and tag (the caller's range index).
type segment struct {
	t0, y0, tau float64
	ms          MeanSquare
	ts          float64 // the input's phase reference time
	tag         int
	filt        []Term  // A_k/(1+jkωτ): the steady-state ripple terms
	trans       float64 // y0 - y_ss(t0): the transient's amplitude
	rippleAmp   float64 // Σ|filt|, the steady-state ripple bound
	rippleHz    float64 // frequency of the highest term
	rippleLowHz float64 // frequency of the lowest term
}

// steady returns y_ss(t) and, with ripple false, its mean C0.
func (s *segment) steady(t float64, ripple bool) float64 {
	if !ripple || len(s.filt) == 0 {
		return s.ms.C0
	}
	return s.ms.C0 + s.ripple(t)
}

// ripple returns the steady-state ripple y_ss(t) - C0. The phase is
// reduced to cycles of the fundamental first, to stay accurate at MHz,
// and e^{jKθ} is built by repeated multiplication (terms are sorted by
// K).
func (s *segment) ripple(t float64) float64 {
	cyc := s.ms.FreqHz * (t - s.ts)
	cyc -= math.Floor(cyc)
	sin, cos := math.Sincos(2 * math.Pi * cyc)
	z := complex(cos, sin)
	zk := complex(1, 0)
	k := 0
	var y float64
	for _, term := range s.filt {
		for k < term.K {
			zk *= z
			k++
		}
		y += real(term.A)*real(zk) - imag(term.A)*imag(zk)
	}
	return y
}

// value returns y(t) within the segment.
func (s *segment) value(t float64, ripple bool) float64 {
	y := s.steady(t, ripple)
	if s.trans != 0 {
		y += s.trans * math.Exp(-(t-s.t0)/s.tau)
	}
	return y
}

// Averager is a first-order mean-square averager, τ y' + y = u, whose
// input changes at events; between events it is solved exactly (see the
// package documentation). It keeps a bounded history so that values in
// the recent past (a voltmeter aperture) can be evaluated.
type Averager struct {
	segs []segment
}

// maxSegments bounds the history.
const maxSegments = 4096

// NewAverager returns an averager at rest (y = 0, no input) from time t0
// with time constant tauS and tag.
func NewAverager(t0, tauS float64, tag int) *Averager {
	a := &Averager{}
	a.segs = append(a.segs, newSegment(t0, 0, tauS, MeanSquare{}, t0, tag))
	return a
}

func newSegment(t0, y0, tau float64, ms MeanSquare, ts float64, tag int) segment {
	s := segment{t0: t0, y0: y0, tau: tau, ms: ms, ts: ts, tag: tag}
	lo := math.Inf(1)
	for _, term := range ms.Terms {
		w := 2 * math.Pi * float64(term.K) * ms.FreqHz
		a := term.A / complex(1, w*tau)
		s.filt = append(s.filt, Term{K: term.K, A: a})
		s.rippleAmp += cmplx.Abs(a)
		s.rippleHz = math.Max(s.rippleHz, float64(term.K)*ms.FreqHz)
		lo = math.Min(lo, float64(term.K)*ms.FreqHz)
	}
	if len(s.filt) > 0 {
		s.rippleLowHz = lo
	}
	s.trans = y0 - s.steady(t0, true)
	return s
}

// Set changes the input at time t (not before the last event): from t on
// the input is ms with phase reference ts, the time constant tauS and the
// tag tag. The state y is continuous.
func (a *Averager) Set(t float64, ms MeanSquare, ts, tauS float64, tag int) {
	last := &a.segs[len(a.segs)-1]
	if t < last.t0 {
		t = last.t0
	}
	y := last.value(t, true)
	s := newSegment(t, y, tauS, ms, ts, tag)
	if t == last.t0 {
		*last = s
		return
	}
	if len(a.segs) >= maxSegments {
		a.segs = append(a.segs[:0], a.segs[len(a.segs)-maxSegments/2:]...)
	}
	a.segs = append(a.segs, s)
}

// index returns the index of the segment in force at t.
func (a *Averager) index(t float64) int {
	i := sort.Search(len(a.segs), func(i int) bool { return a.segs[i].t0 > t }) - 1
	if i < 0 {
		i = 0
	}
	return i
}

// Value returns the mean-square state y(t), V².
func (a *Averager) Value(t float64) float64 {
	s := &a.segs[a.index(t)]
	if t < s.t0 {
		t = s.t0
	}
	return s.value(t, true)
}

// Tag returns the tag in force at t.
func (a *Averager) Tag(t float64) int {
	return a.segs[a.index(t)].tag
}

// Last returns the current input, phase reference, time constant and tag.
func (a *Averager) Last() (ms MeanSquare, ts, tauS float64, tag int) {
	s := &a.segs[len(a.segs)-1]
	return s.ms, s.ts, s.tau, s.tag
}

// Hold describes periodic intervals during which a meter output is
// frozen at its value at the start of the interval: from k·IntervalS to
// k·IntervalS + DurationS. A zero Hold freezes nothing.
type Hold struct {
	IntervalS, DurationS float64
}

// start returns the start of the hold containing t, if any.
func (h Hold) start(t float64) (float64, bool) {
	if h.IntervalS <= 0 || h.DurationS <= 0 {
		return 0, false
	}
	k := math.Floor(t / h.IntervalS)
	s := k * h.IntervalS
	if t-s < h.DurationS {
		return s, true
	}
	return 0, false
}

// Output maps the mean-square state and tag to a meter output.
type Output func(y float64, tag int) float64

// At returns out(y(t)), held as h says.
func (a *Averager) At(t float64, out Output, h Hold) float64 {
	if s, ok := h.start(t); ok {
		t = s
	}
	i := a.index(t)
	return out(a.segs[i].value(math.Max(t, a.segs[i].t0), true), a.segs[i].tag)
}

// gauss8 are the 8-point Gauss-Legendre nodes and weights on [-1, 1]
// (Abramowitz & Stegun Table 25.4).
var gauss8 = [8][2]float64{
	{-0.9602898564975363, 0.1012285362903763},
	{-0.7966664774136267, 0.2223810344533745},
	{-0.5255324099163290, 0.3137066458778873},
	{-0.1834346424956498, 0.3626837833783620},
	{0.1834346424956498, 0.3626837833783620},
	{0.5255324099163290, 0.3137066458778873},
	{0.7966664774136267, 0.2223810344533745},
	{0.9602898564975363, 0.1012285362903763},
}

// Integration limits.
const (
	rippleNegligible = 1e-10 // relative error below which ripple is averaged analytically
	maxSubintervals  = 20000
)

// Mean returns the mean of out(y(t)) over [t0, t1], the output frozen
// during holds: what an integrating voltmeter with aperture t1-t0 reads.
// Pieces are split at events and hold edges and integrated with 8-point
// Gauss-Legendre on sub-intervals no longer than half a period of the
// highest ripple term that matters, nor than τ/2 while a transient
// lasts. Ripple too small to matter is averaged to its mean.
func (a *Averager) Mean(t0, t1 float64, out Output, h Hold) float64 {
	if !(t1 > t0) {
		return a.At(t0, out, h)
	}
	cuts := []float64{t0, t1}
	for i := range a.segs {
		if a.segs[i].t0 > t0 && a.segs[i].t0 < t1 {
			cuts = append(cuts, a.segs[i].t0)
		}
	}
	if h.IntervalS > 0 && h.DurationS > 0 {
		k0 := math.Floor(t0 / h.IntervalS)
		for k := k0; k*h.IntervalS < t1; k++ {
			for _, c := range []float64{k * h.IntervalS, k*h.IntervalS + h.DurationS} {
				if c > t0 && c < t1 {
					cuts = append(cuts, c)
				}
			}
			if k-k0 > 1e6 {
				break
			}
		}
	}
	sort.Float64s(cuts)
	var sum float64
	for i := 0; i+1 < len(cuts); i++ {
		lo, hi := cuts[i], cuts[i+1]
		if hi <= lo {
			continue
		}
		mid := (lo + hi) / 2
		if s, ok := h.start(mid); ok {
			sum += (hi - lo) * a.At(s, out, Hold{})
			continue
		}
		sum += a.integrate(lo, hi, out)
	}
	return sum / (t1 - t0)
}

// integrate integrates out(y) over [lo, hi] inside one segment.
//
// Without ripple that matters, the integrand is smooth: Gauss-Legendre on
// sub-intervals of at most τ/2 while a transient lasts. With ripple, the
// partial periods at both ends are resolved point by point and the whole
// periods in between are integrated once: exactly when the transient is
// gone (the integrand is periodic), and as the period average
// G(m) = (1/T)∫ out(m + ripple) at the slowly moving mean m(t) while a
// transient much slower than a period lasts (the error is of the order
// of (T/τ)·ripple², negligible).
func (a *Averager) integrate(lo, hi float64, out Output) float64 {
	s := &a.segs[a.index((lo+hi)/2)]
	width := hi - lo
	c0 := math.Max(s.ms.C0, 1e-300)
	transAt := func(t float64) float64 { return math.Abs(s.trans) * math.Exp(-(t-s.t0)/s.tau) }
	transMatters := func(t float64) bool { return s.trans != 0 && transAt(t) > 1e-13*c0 }
	smoothN := func(lo, hi float64) int {
		if transMatters(lo) {
			return int(math.Ceil((hi - lo) / (s.tau / 2)))
		}
		return 1
	}
	if s.rippleAmp == 0 {
		return gaussLegendre(lo, hi, smoothN(lo, hi), func(t float64) float64 { return out(s.value(t, false), s.tag) })
	}
	r := s.rippleAmp / c0
	periods := width * s.rippleLowHz
	// The oscillating part averages to at most r/(π·periods) of the mean
	// over a partial period, and the square root's curvature leaves a
	// bias of order r²/8.
	if r/(math.Pi*math.Max(periods, 1e-300))+r*r/8 <= rippleNegligible {
		return gaussLegendre(lo, hi, smoothN(lo, hi), func(t float64) float64 { return out(s.value(t, false), s.tag) })
	}
	exact := func(t float64) float64 { return out(s.value(t, true), s.tag) }
	// Sub-intervals per period of the fundamental: two per period of the
	// highest term.
	perPeriod := max(2, int(math.Ceil(2*s.rippleHz/s.ms.FreqHz)))
	T := 1 / s.ms.FreqHz
	brute := func(lo, hi float64) float64 {
		n := max(smoothN(lo, hi), int(math.Ceil((hi-lo)/T*float64(perPeriod))))
		return gaussLegendre(lo, hi, min(n, maxSubintervals), exact)
	}
	if width < 3*T {
		return brute(lo, hi)
	}
	// Whole periods of the fundamental, aligned on the signal's phase.
	k0 := math.Ceil((lo - s.ts) / T)
	k1 := math.Floor((hi - s.ts) / T)
	a0, b0 := s.ts+k0*T, s.ts+k1*T
	nPer := int(k1 - k0)
	if nPer < 1 {
		return brute(lo, hi)
	}
	sum := brute(lo, a0) + brute(b0, hi)
	switch {
	case !transMatters(a0):
		sum += float64(nPer) * brute(a0, a0+T)
	case T < s.tau/50:
		// Period average at the transient's slowly moving mean.
		n := perPeriod
		h := T / float64(n)
		qs := make([]float64, 0, 8*n)
		ws := make([]float64, 0, 8*n)
		for k := 0; k < n; k++ {
			c := a0 + (float64(k)+0.5)*h
			for _, gw := range gauss8 {
				qs = append(qs, s.ripple(c+gw[0]*h/2))
				ws = append(ws, gw[1]*h/2/T)
			}
		}
		g := func(t float64) float64 {
			m := s.value(t, false)
			var v float64
			for i, q := range qs {
				v += ws[i] * out(m+q, s.tag)
			}
			return v
		}
		sum += gaussLegendre(a0, b0, smoothN(a0, b0), g)
	default:
		sum += brute(a0, b0)
	}
	return sum
}

// gaussLegendre integrates f over [lo, hi] with the 8-point rule on n
// equal sub-intervals.
func gaussLegendre(lo, hi float64, n int, f func(float64) float64) float64 {
	if hi <= lo {
		return 0
	}
	n = max(n, 1)
	step := (hi - lo) / float64(n)
	var sum float64
	for k := 0; k < n; k++ {
		c := lo + (float64(k)+0.5)*step
		for _, gw := range gauss8 {
			sum += gw[1] * f(c+gw[0]*step/2)
		}
	}
	return sum * step / 2
}
