package analysis

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/interp"
)

// curve is a response in dB as a function of x = log10(f/Hz).
type curve interface {
	atLog(x float64) float64
	slopeLog(x float64) float64 // d(dB)/d(log10 f)
}

// Interpolant is the monotone piecewise cubic (Fritsch–Butland) through a
// response in (log10 f, dB). Between two points it never overshoots them,
// so each interval holds at most one crossing of a level that the two
// points straddle.
type Interpolant struct {
	xs, ys []float64
	fb     interp.FritschButland
}

var _ curve = (*Interpolant)(nil)

// NewInterpolant returns the interpolant through (freqHz[i], gainDB[i]).
// Frequencies must be positive, finite and strictly increasing, gains
// finite, at least two points.
func NewInterpolant(freqHz, gainDB []float64) (*Interpolant, error) {
	if len(freqHz) != len(gainDB) {
		return nil, fmt.Errorf("%w: %d frequencies but %d gains", ErrResponse, len(freqHz), len(gainDB))
	}
	xs := make([]float64, len(freqHz))
	for i, f := range freqHz {
		if !(f > 0) || math.IsInf(f, 0) {
			return nil, fmt.Errorf("%w: frequency[%d] = %v Hz: want positive and finite", ErrResponse, i, f)
		}
		xs[i] = math.Log10(f)
	}
	return newInterpolantLog(xs, append([]float64(nil), gainDB...))
}

func newInterpolantLog(xs, ys []float64) (*Interpolant, error) {
	if len(xs) < 2 {
		return nil, fmt.Errorf("%w: %d points: want at least 2", ErrResponse, len(xs))
	}
	for i := range xs {
		if math.IsNaN(ys[i]) || math.IsInf(ys[i], 0) {
			return nil, fmt.Errorf("%w: gain[%d] = %v dB: want finite", ErrResponse, i, ys[i])
		}
		if i > 0 && !(xs[i] > xs[i-1]) {
			return nil, fmt.Errorf("%w: frequencies not strictly increasing at point %d", ErrResponse, i)
		}
	}
	it := &Interpolant{xs: xs, ys: ys}
	if err := it.fb.Fit(xs, ys); err != nil {
		return nil, fmt.Errorf("%w: %v", ErrResponse, err)
	}
	return it, nil
}

// Range returns the first and last frequency, Hz.
func (it *Interpolant) Range() (loHz, hiHz float64) {
	return math.Pow(10, it.xs[0]), math.Pow(10, it.xs[len(it.xs)-1])
}

// At returns the interpolated gain at freqHz, dB; NaN outside the range.
func (it *Interpolant) At(freqHz float64) float64 {
	if !(freqHz > 0) {
		return math.NaN()
	}
	x := math.Log10(freqHz)
	const tol = 1e-12
	if x < it.xs[0]-tol || x > it.xs[len(it.xs)-1]+tol {
		return math.NaN()
	}
	return it.atLog(clamp(x, it.xs[0], it.xs[len(it.xs)-1]))
}

func (it *Interpolant) atLog(x float64) float64 { return it.fb.Predict(x) }

func (it *Interpolant) slopeLog(x float64) float64 { return it.fb.PredictDerivative(x) }

// Crossing is where the response passes through the corner level.
type Crossing struct {
	FreqHz float64 `json:"hz"`
	// Rising is true where the gain rises through the level with
	// increasing frequency (a lower corner), false where it falls.
	Rising bool `json:"rising"`
}

// crossings finds every crossing of level by c on the grid xs (sorted).
// "Above" means ≥ level, so touching the level is not a crossing. Each
// interval whose ends are on opposite sides is refined with Brent's method
// on c itself.
func crossings(c curve, xs []float64, level float64) []float64 {
	var out []float64
	if len(xs) < 2 {
		return out
	}
	prevX := xs[0]
	prev := c.atLog(prevX) - level
	for _, x := range xs[1:] {
		v := c.atLog(x) - level
		if (prev >= 0) != (v >= 0) {
			r := brent(func(t float64) float64 { return c.atLog(t) - level }, prevX, x, prev, v)
			out = append(out, r)
		}
		prevX, prev = x, v
	}
	return out
}

// brent finds a root of f in [a, b] given fa = f(a), fb = f(b) of opposite
// signs (R. P. Brent, Algorithms for Minimization without Derivatives,
// 1973, ch. 4 — the zeroin algorithm).
func brent(f func(float64) float64, a, b, fa, fb float64) float64 {
	if fa == 0 {
		return a
	}
	if fb == 0 {
		return b
	}
	c, fc := a, fa
	d := b - a
	e := d
	for iter := 0; iter < 200; iter++ {
		if (fb > 0) == (fc > 0) {
			c, fc = a, fa
			d = b - a
			e = d
		}
		if math.Abs(fc) < math.Abs(fb) {
			a, b, c = b, c, b
			fa, fb, fc = fb, fc, fb
		}
		tol := 2*2.2e-16*math.Abs(b) + 1e-15
		m := 0.5 * (c - b)
		if math.Abs(m) <= tol || fb == 0 {
			return b
		}
		if math.Abs(e) >= tol && math.Abs(fa) > math.Abs(fb) {
			s := fb / fa
			var p, q float64
			if a == c {
				p = 2 * m * s
				q = 1 - s
			} else {
				q0 := fa / fc
				r := fb / fc
				p = s * (2*m*q0*(q0-r) - (b-a)*(r-1))
				q = (q0 - 1) * (r - 1) * (s - 1)
			}
			if p > 0 {
				q = -q
			} else {
				p = -p
			}
			if 2*p < math.Min(3*m*q-math.Abs(tol*q), math.Abs(e*q)) {
				e = d
				d = p / q
			} else {
				d = m
				e = m
			}
		} else {
			d = m
			e = m
		}
		a, fa = b, fb
		if math.Abs(d) > tol {
			b += d
		} else if m > 0 {
			b += tol
		} else {
			b -= tol
		}
		fb = f(b)
	}
	return b
}

// denseGrid returns the knots xs plus enough points in between that no
// step exceeds maxStep (decades).
func denseGrid(xs []float64, maxStep float64) []float64 {
	if len(xs) == 0 {
		return nil
	}
	out := []float64{xs[0]}
	for i := 1; i < len(xs); i++ {
		d := xs[i] - xs[i-1]
		n := int(math.Ceil(d / maxStep))
		for k := 1; k < n; k++ {
			out = append(out, xs[i-1]+d*float64(k)/float64(n))
		}
		out = append(out, xs[i])
	}
	return out
}

// maxOn returns the maximum of c over the grid, refined by golden-section
// search around the best grid point.
func maxOn(c curve, grid []float64, refine bool) (x, v float64) {
	best := 0
	bv := math.Inf(-1)
	for i, g := range grid {
		if y := c.atLog(g); y > bv {
			best, bv = i, y
		}
	}
	x = grid[best]
	if len(grid) < 3 {
		return x, bv
	}
	if !refine {
		// Between samples: the vertex of the parabola through the
		// largest sample and its neighbours (in log10 f, dB).
		if best == 0 || best == len(grid)-1 {
			return x, bv
		}
		xs := grid[best-1 : best+2]
		ys := []float64{c.atLog(xs[0]), bv, c.atLog(xs[2])}
		xv := parabolaX(xs, ys)
		return xv, parabolaAt(xs, ys, xv)
	}
	lo := grid[max(best-1, 0)]
	hi := grid[min(best+1, len(grid)-1)]
	gr := (math.Sqrt(5) - 1) / 2
	a, b := lo, hi
	c1 := b - gr*(b-a)
	c2 := a + gr*(b-a)
	f1, f2 := c.atLog(c1), c.atLog(c2)
	for i := 0; i < 60 && b-a > 1e-12; i++ {
		if f1 > f2 {
			b, c2, f2 = c2, c1, f1
			c1 = b - gr*(b-a)
			f1 = c.atLog(c1)
		} else {
			a, c1, f1 = c1, c2, f2
			c2 = a + gr*(b-a)
			f2 = c.atLog(c2)
		}
	}
	xm := (a + b) / 2
	if vm := c.atLog(xm); vm > bv {
		return xm, vm
	}
	return x, bv
}

// parabolaAt evaluates the parabola through three points at x (Newton's
// divided differences).
func parabolaAt(x, y []float64, v float64) float64 {
	d1 := (y[1] - y[0]) / (x[1] - x[0])
	d2 := (y[2] - y[1]) / (x[2] - x[1])
	c := (d2 - d1) / (x[2] - x[0])
	return y[0] + d1*(v-x[0]) + c*(v-x[0])*(v-x[1])
}

// meanOn is the mean of c over [a, b] in x (Simpson's rule, 256 intervals).
func meanOn(c curve, a, b float64) float64 {
	const n = 256
	h := (b - a) / n
	s := c.atLog(a) + c.atLog(b)
	for i := 1; i < n; i++ {
		w := 2.0
		if i%2 == 1 {
			w = 4
		}
		s += w * c.atLog(a+float64(i)*h)
	}
	return s * h / 3 / (b - a)
}
