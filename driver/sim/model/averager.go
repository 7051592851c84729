package model

import (
	"math"
	"math/cmplx"
	"sort"
)

// segment is the averager between two events: a constant input series,
// time constant and tag (the caller's range index). With a post-filter
// (post > 0) the output is the state y through a second first-order
// lag, τ2·y2' + y2 = y; filt, trans and trans2 then describe y2, filtY
// and transY the state y.
type segment struct {
	t0, y0, tau float64
	post        float64 // the post-filter's time constant τ2 (0: none)
	ms          MeanSquare
	ts          float64 // the input's phase reference time
	tag         int
	filt        []Term  // the output's steady-state ripple terms
	filtY       []Term  // A_k/(1+jkωτ): the state's steady-state ripple terms
	trans       float64 // the output's e^(−t/τ) amplitude
	trans2      float64 // the output's e^(−t/τ2) amplitude (post-filter only)
	transY      float64 // y0 − y_ss(t0): the state's transient amplitude
	rippleAmp   float64 // Σ|filt|, the steady-state ripple bound
	rippleHz    float64 // frequency of the highest term
	rippleLowHz float64 // frequency of the lowest term
}

// steady returns the output's steady state at t and, with ripple false,
// its mean C0.
func (s *segment) steady(t float64, ripple bool) float64 {
	if !ripple || len(s.filt) == 0 {
		return s.ms.C0
	}
	return s.ms.C0 + s.ripple(t)
}

// ripple returns the output's steady-state ripple y_ss(t) − C0.
func (s *segment) ripple(t float64) float64 { return s.rippleOf(s.filt, t) }

// rippleOf returns the ripple the terms make at t. The phase is reduced
// to cycles of the fundamental first, to stay accurate at MHz, and
// e^{jKθ} is built by repeated multiplication (terms are sorted by K).
func (s *segment) rippleOf(terms []Term, t float64) float64 {
	cyc := s.ms.FreqHz * (t - s.ts)
	cyc -= math.Floor(cyc)
	sin, cos := math.Sincos(2 * math.Pi * cyc)
	z := complex(cos, sin)
	zk := complex(1, 0)
	k := 0
	var y float64
	for _, term := range terms {
		for k < term.K {
			zk *= z
			k++
		}
		y += real(term.A)*real(zk) - imag(term.A)*imag(zk)
	}
	return y
}

// value returns the output (y, or y2 behind a post-filter) at t within
// the segment.
func (s *segment) value(t float64, ripple bool) float64 {
	y := s.steady(t, ripple)
	if s.trans != 0 {
		y += s.trans * math.Exp(-(t-s.t0)/s.tau)
	}
	if s.trans2 != 0 {
		y += s.trans2 * math.Exp(-(t-s.t0)/s.post)
	}
	return y
}

// state returns the averager's state y at t within the segment (the
// output when there is no post-filter).
func (s *segment) state(t float64) float64 {
	y := s.ms.C0 + s.rippleOf(s.filtY, t)
	if s.transY != 0 {
		y += s.transY * math.Exp(-(t-s.t0)/s.tau)
	}
	return y
}

// tauMin is the shorter of the segment's time constants.
func (s *segment) tauMin() float64 {
	if s.post > 0 {
		return math.Min(s.tau, s.post)
	}
	return s.tau
}

// transAt bounds the transients' size at t.
func (s *segment) transAt(t float64) float64 {
	v := math.Abs(s.trans) * math.Exp(-(t-s.t0)/s.tau)
	if s.trans2 != 0 {
		v += math.Abs(s.trans2) * math.Exp(-(t-s.t0)/s.post)
	}
	return v
}

// Averager is a first-order mean-square averager, τ y' + y = u, whose
// input changes at events; between events it is solved exactly (see the
// package documentation). It keeps a bounded history so that values in
// the recent past (a voltmeter aperture) can be evaluated.
type Averager struct {
	segs []segment
	post float64 // the post-filter's time constant (0: none)
}

// maxSegments bounds the history.
const maxSegments = 4096

// NewAverager returns an averager at rest (y = 0, no input) from time t0
// with time constant tauS and tag.
func NewAverager(t0, tauS float64, tag int) *Averager {
	return NewFilteredAverager(t0, tauS, 0, tag)
}

// NewFilteredAverager is NewAverager with the averager's output behind a
// second first-order lag of time constant postS (0: none), as a
// converter's output filter makes it: the output approaches a step as
// the sum of two exponentials, not one. A post-filter within 10⁻⁶ of
// the averager's time constant is taken 10⁻⁶ longer (the double pole's
// solution t·e^(−t/τ) differs from the nudged one by about that much of
// the transient).
func NewFilteredAverager(t0, tauS, postS float64, tag int) *Averager {
	a := &Averager{post: postS}
	a.segs = append(a.segs, a.newSegment(t0, 0, 0, tauS, MeanSquare{}, t0, tag))
	return a
}

// newSegment starts a segment at t0 from the state y0 and the output
// y20 (the same without a post-filter).
func (a *Averager) newSegment(t0, y0, y20, tau float64, ms MeanSquare, ts float64, tag int) segment {
	post := a.post
	if post > 0 && math.Abs(post-tau) <= 1e-6*tau {
		post = tau * (1 + 1e-6)
	}
	s := segment{t0: t0, y0: y0, tau: tau, post: post, ms: ms, ts: ts, tag: tag}
	lo := math.Inf(1)
	for _, term := range ms.Terms {
		w := 2 * math.Pi * float64(term.K) * ms.FreqHz
		ay := term.A / complex(1, w*tau)
		s.filtY = append(s.filtY, Term{K: term.K, A: ay})
		ao := ay
		if post > 0 {
			ao /= complex(1, w*post)
			s.filt = append(s.filt, Term{K: term.K, A: ao})
		}
		s.rippleAmp += cmplx.Abs(ao)
		s.rippleHz = math.Max(s.rippleHz, float64(term.K)*ms.FreqHz)
		lo = math.Min(lo, float64(term.K)*ms.FreqHz)
	}
	if post == 0 {
		s.filt = s.filtY // the output is the state
	}
	if len(s.filt) > 0 {
		s.rippleLowHz = lo
	}
	s.transY = y0 - (ms.C0 + s.rippleOf(s.filtY, t0))
	if post == 0 {
		s.trans = s.transY
		return s
	}
	// τ2·y2' + y2 = y_ss + A·e^(−t/τ): the exponential passes the lag as
	// A·τ/(τ − τ2)·e^(−t/τ); e^(−t/τ2) takes up the output's start.
	s.trans = s.transY * tau / (tau - post)
	s.trans2 = y20 - s.steady(t0, true) - s.trans
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
	s := a.newSegment(t, last.state(t), last.value(t, true), tauS, ms, ts, tag)
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
	transMatters := func(t float64) bool { return (s.trans != 0 || s.trans2 != 0) && s.transAt(t) > 1e-13*c0 }
	smoothN := func(lo, hi float64) int {
		if transMatters(lo) {
			return int(math.Ceil((hi - lo) / (s.tauMin() / 2)))
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
	case T < s.tauMin()/50:
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
