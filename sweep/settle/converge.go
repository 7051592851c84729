package settle

import "math"

// Sample is one reading: TS physical seconds since the point's frequency
// was set, V the reading (any unit; relative comparisons only).
type Sample struct {
	TS float64
	V  float64
}

// Criterion says when a run of readings counts as converged.
type Criterion struct {
	// Tol is the relative agreement required: the spread (max − min) of
	// the window must not exceed Tol·|mean|.
	Tol float64
	// N is the least number of consecutive readings in the window.
	N int
	// NotBeforeS is the modelled dwell: a window may only start with a
	// reading taken at or after it.
	NotBeforeS float64
	// HoldS is the converter's output hold. When positive, a window must
	// span more than HoldS (first to last reading's time) so that at least
	// one of its readings was taken while the output was live: readings
	// inside one hold are identical and would otherwise fake convergence.
	// (The scheduler, which knows when the output was last moving, may
	// instead set NotBeforeS late enough and leave HoldS 0.)
	HoldS float64
	// TauS, when positive, is the converter's time constant: a window is
	// also refused when its trend says the output is still moving by more
	// than Tol. An exponential approach moves at (y − y∞)/τ, so the
	// remaining offset of the reading is about τ·|dV/dt|: the least-squares
	// slope of the window times τ, relative to the mean, must be ≤ Tol.
	// This catches a settle that a wrong prediction cut short, which
	// readings spaced much closer than τ would otherwise accept.
	TauS float64
}

// Converge accumulates the readings of one point and reports convergence.
// The zero value is not usable; call NewConverge.
type Converge struct {
	c       Criterion
	samples []Sample
	win     int // start index of the accepted window, -1 while unsettled
	moving  bool
	trend   float64
}

// NewConverge returns a test with criterion c (N below 2 is taken as 2).
func NewConverge(c Criterion) *Converge {
	if c.N < 2 {
		c.N = 2
	}
	return &Converge{c: c, win: -1}
}

// Add records a reading and reports whether the readings have converged.
// Once converged it keeps reporting true and the window is frozen.
func (cv *Converge) Add(s Sample) bool {
	if cv.win >= 0 {
		return true
	}
	cv.samples = append(cv.samples, s)
	cv.moving = false
	last := len(cv.samples) - 1
	// Windows ending at the last reading, shortest first, with at least N
	// readings, starting after NotBeforeS and spanning beyond the hold. A
	// window failing only the trend test may pass when longer (the trend
	// of a longer window is less noisy); one failing the spread test
	// would only get worse with earlier readings.
	for i := last - cv.c.N + 1; i >= 0; i-- {
		first := cv.samples[i]
		if first.TS < cv.c.NotBeforeS {
			return false
		}
		if cv.c.HoldS > 0 && !(s.TS-first.TS > cv.c.HoldS) {
			continue
		}
		w := cv.samples[i:]
		if !spreadOK(w, cv.c.Tol) {
			cv.moving = true
			return false
		}
		if cv.c.TauS > 0 {
			if r := TrendRel(w, cv.c.TauS); r > cv.c.Tol {
				cv.moving = true
				cv.trend = r
				continue
			}
		}
		cv.win = i
		return true
	}
	return false
}

// Moving reports whether the last reading's windows were refused because
// the readings still move (spread or trend), rather than for lack of
// readings.
func (cv *Converge) Moving() bool { return cv.moving }

// TrendRel returns τ·|slope|/|mean| of the readings in w, the slope by
// least squares against their times: the offset from the final value that
// a first-order approach moving this fast still has.
func TrendRel(w []Sample, tauS float64) float64 {
	n := float64(len(w))
	if n < 2 {
		return 0
	}
	var st, sv float64
	for _, s := range w {
		st += s.TS
		sv += s.V
	}
	mt, mv := st/n, sv/n
	var stt, stv float64
	for _, s := range w {
		stt += (s.TS - mt) * (s.TS - mt)
		stv += (s.TS - mt) * (s.V - mv)
	}
	if stt == 0 || mv == 0 {
		return 0
	}
	return tauS * math.Abs(stv/stt) / math.Abs(mv)
}

func spreadOK(w []Sample, tol float64) bool {
	lo, hi, sum := math.Inf(1), math.Inf(-1), 0.0
	for _, s := range w {
		lo = math.Min(lo, s.V)
		hi = math.Max(hi, s.V)
		sum += s.V
	}
	mean := sum / float64(len(w))
	return hi-lo <= tol*math.Abs(mean)
}

// Converged reports whether a window has been accepted.
func (cv *Converge) Converged() bool { return cv.win >= 0 }

// Samples returns every reading so far.
func (cv *Converge) Samples() []Sample { return cv.samples }

// Window returns the accepted window, or, while unsettled, the last N
// readings (fewer if there are fewer): what an unsettled point reports.
func (cv *Converge) Window() []Sample {
	if cv.win >= 0 {
		return cv.samples[cv.win:]
	}
	i := len(cv.samples) - cv.c.N
	if i < 0 {
		i = 0
	}
	return cv.samples[i:]
}

// Stats returns the mean of the values in w and the experimental standard
// deviation of that mean relative to it, s(q̄)/|q̄| with
// s(q̄) = s(q)/√n (JCGM 100:2008 §4.2.3, Type A). With one value the
// deviation is 0.
func Stats(w []Sample) (mean, stdRel float64) {
	n := float64(len(w))
	if n == 0 {
		return math.NaN(), math.NaN()
	}
	for _, s := range w {
		mean += s.V
	}
	mean /= n
	if len(w) < 2 || mean == 0 {
		return mean, 0
	}
	var ss float64
	for _, s := range w {
		d := s.V - mean
		ss += d * d
	}
	sq := math.Sqrt(ss / (n - 1)) // JCGM 100:2008 eq. (4)
	return mean, sq / math.Sqrt(n) / math.Abs(mean)
}

// Predictor predicts the next point's reading from the previous points by
// extrapolating log(value) against log(frequency). With two points it
// continues their slope (the DUT's local slope). With three it also
// follows a slope that is growing, as it does entering a roll-off, where
// the deviation from the passband grows like a power of f: the next slope
// is the last one times the growth between the last two (capped at 4),
// which a straight line would underestimate; a shrinking slope is
// continued unchanged (an overestimate of the step, which only costs
// dwell). A wrong prediction only costs convergence readings: the
// converge test and the scheduler's model check have the last word.
type Predictor struct {
	f, v []float64
}

// Add records a measured point.
func (p *Predictor) Add(freqHz, value float64) {
	if !(freqHz > 0) || !(value > 0) {
		return
	}
	p.f = append(p.f, math.Log(freqHz))
	p.v = append(p.v, math.Log(value))
	if len(p.f) > 3 {
		p.f, p.v = p.f[len(p.f)-3:], p.v[len(p.v)-3:]
	}
}

// Len returns the number of points remembered (at most 3).
func (p *Predictor) Len() int { return len(p.f) }

// Reset forgets the history (after a range or level change that breaks
// the continuity of values).
func (p *Predictor) Reset() { p.f, p.v = nil, nil }

// Predict returns the predicted value at freqHz, ok false with no history.
// The slope is clamped to ±3 decades per decade of frequency so that a
// noisy history cannot predict absurd values.
func (p *Predictor) Predict(freqHz float64) (value float64, ok bool) {
	n := len(p.f)
	if n == 0 {
		return 0, false
	}
	if n == 1 {
		return math.Exp(p.v[0]), true
	}
	slope := func(i int) (float64, bool) {
		df := p.f[i+1] - p.f[i]
		if df == 0 {
			return 0, false
		}
		return (p.v[i+1] - p.v[i]) / df, true
	}
	s2, ok2 := slope(n - 2)
	if !ok2 {
		return math.Exp(p.v[n-1]), true
	}
	next := s2
	if n == 3 {
		if s1, ok1 := slope(0); ok1 && s1*s2 > 0 && math.Abs(s2) > math.Abs(s1) {
			next = s2 * math.Min(4, s2/s1)
		}
	}
	next = math.Max(-3, math.Min(3, next))
	return math.Exp(p.v[n-1] + next*(math.Log(freqHz)-p.f[n-1])), true
}
