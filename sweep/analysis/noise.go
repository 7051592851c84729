package analysis

import (
	"math"
	"sort"
)

// diffNoiseDB estimates the noise of a response (dB rms) from the data
// alone, by the difference-based estimator of Gasser, Sroka and
// Jennen-Steinmetz (Biometrika 73, 1986): each interior point's
// pseudo-residual e = a·y[i−1] + b·y[i+1] − y[i] (a, b the linear
// interpolation weights in log frequency) is scaled by c² = 1/(a²+b²+1),
// so that E[c²e²] = σ² for a locally straight response. The median of
// c²e² divided by 0.4549 (the median of χ² with one degree of freedom) is
// used, so that the few points at a knee, where the response is not
// straight, do not dominate. NaN with fewer than 5 points.
func diffNoiseDB(xs, ys []float64) float64 {
	if len(xs) < 5 {
		return math.NaN()
	}
	v := make([]float64, 0, len(xs)-2)
	for i := 1; i+1 < len(xs); i++ {
		a := (xs[i+1] - xs[i]) / (xs[i+1] - xs[i-1])
		b := 1 - a
		e := a*ys[i-1] + b*ys[i+1] - ys[i]
		v = append(v, e*e/(a*a+b*b+1))
	}
	sort.Float64s(v)
	return math.Sqrt(median(v) / 0.4549)
}

// median of a sorted slice.
func median(s []float64) float64 {
	if len(s) == 0 {
		return math.NaN()
	}
	if len(s)%2 == 1 {
		return s[len(s)/2]
	}
	return (s[len(s)/2-1] + s[len(s)/2]) / 2
}
