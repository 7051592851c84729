package settle

import (
	"math"

	"gonum.org/v1/gonum/mat"
)

// FitHarmonics is the number of ripple harmonics a fitted mean removes:
// the converter's DC output is the square root of a filtered mean square
// carrying a ripple at 2f, so its ripple has a fundamental and, for a
// large ripple a, a second harmonic of relative amplitude about a²/16
// (the Taylor series of √(1 + a·cos x)); the third (a³/32) is under the
// tolerance wherever the first two are.
const FitHarmonics = 2

// MinFitReadings is the fewest single readings a fitted mean takes: a
// constant and FitHarmonics sine-cosine pairs.
const MinFitReadings = 2*FitHarmonics + 1

// maxFitGain bounds the factor by which a fit may enlarge the standard
// deviation of the constant term over a plain mean of the same readings;
// readings crowded into a part of the ripple period would let it grow
// without bound.
const maxFitGain = 2

// FitMean returns the constant term c0 of the least-squares fit of
//
//	v(t) = c0 + Σₕ aₕ·cos(2π·h·rippleHz·t) + bₕ·sin(2π·h·rippleHz·t),  h = 1…harmonics,
//
// to readings v taken at times tS (the middle of each reading's aperture,
// physical seconds): the known-frequency sine fit of IEEE Std 1057 (its
// three-parameter fit, extended to harmonics), which, unlike a plain
// mean, removes the ripple whatever the readings' actual spacing. On
// readings evenly spread over whole ripple periods it equals their mean.
// ok is false, and the mean is returned, when there are too few readings
// or their times do not spread over the ripple period well enough.
func FitMean(tS, v []float64, rippleHz float64, harmonics int) (c0 float64, ok bool) {
	n := len(v)
	var sum float64
	for _, x := range v {
		sum += x
	}
	if n == 0 {
		return 0, false
	}
	mean := sum / float64(n)
	p := 2*harmonics + 1
	if harmonics < 1 || len(tS) != n || n < p || !(rippleHz > 0) {
		return mean, false
	}
	a := mat.NewDense(n, p, nil)
	for i, t := range tS {
		row := a.RawRowView(i)
		row[0] = 1
		harmonicTerms(row[1:], 2*math.Pi*rippleHz*(t-tS[0]))
	}
	var ata mat.SymDense
	ata.SymOuterK(1, a.T())
	var inv mat.Dense
	if err := inv.Inverse(&ata); err != nil {
		return mean, false
	}
	// Var(c0) = σ²·[(AᵀA)⁻¹]₀₀ against σ²/n for the mean.
	if g := inv.At(0, 0) * float64(n); !(g <= maxFitGain*maxFitGain) {
		return mean, false
	}
	// c0 = [(AᵀA)⁻¹ Aᵀ v]₀, the normal equations' solution.
	var atv, x mat.VecDense
	atv.MulVec(a.T(), mat.NewVecDense(n, v))
	x.MulVec(&inv, &atv)
	c := x.AtVec(0)
	if math.IsNaN(c) || math.IsInf(c, 0) {
		return mean, false
	}
	return c, true
}

// harmonicTerms writes cos(h·x) and sin(h·x) for h = 1…len(dst)/2 into
// dst, in that order by pairs: the ripple columns of a known-frequency
// sine fit at the phase x of the fundamental.
func harmonicTerms(dst []float64, x float64) {
	for h := 1; 2*h <= len(dst); h++ {
		hx := float64(h) * x
		dst[2*h-2], dst[2*h-1] = math.Cos(hx), math.Sin(hx)
	}
}
