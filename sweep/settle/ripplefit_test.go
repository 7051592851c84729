package settle

import (
	"math"
	"math/rand/v2"
	"testing"
)

// rmsOutput is a converter's DC output relative to its mean-square
// level: √(1 + a·cos(2π·fr·t + φ)), the square root of a mean square
// carrying a ripple of relative amplitude a at fr = 2f.
func rmsOutput(a, frHz, phi, tS float64) float64 {
	return math.Sqrt(1 + a*math.Cos(2*math.Pi*frHz*tS+phi))
}

// trueMean is rmsOutput's mean over one period, by the midpoint rule
// (exact to rounding for a periodic analytic function on an even grid).
func trueMean(a float64) float64 {
	const m = 4096
	var s float64
	for j := 0; j < m; j++ {
		s += math.Sqrt(1 + a*math.Cos(2*math.Pi*(float64(j)+0.5)/m))
	}
	return s / m
}

// TestFitMeanExact: data in the model's span are reproduced exactly by a
// linear least-squares fit (any handbook on linear least squares), so
// the constant comes back whatever the times, here up to ±40 % of the
// spacing late or early.
func TestFitMeanExact(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	const fr, c0 = 4.0, 0.7312
	for trial := 0; trial < 50; trial++ {
		n := MinFitReadings + trial%4
		ts := make([]float64, n)
		vs := make([]float64, n)
		coef := [4]float64{}
		for i := range coef {
			coef[i] = rng.NormFloat64() * 0.1
		}
		for i := range ts {
			ts[i] = 1.234 + (float64(i)+0.8*(rng.Float64()-0.5))/(fr*float64(n))
			x := 2 * math.Pi * fr * ts[i]
			vs[i] = c0 + coef[0]*math.Cos(x) + coef[1]*math.Sin(x) + coef[2]*math.Cos(2*x) + coef[3]*math.Sin(2*x)
		}
		got, ok := FitMean(ts, vs, fr, FitHarmonics)
		if !ok || math.Abs(got-c0) > 1e-12 {
			t.Fatalf("trial %d: c0 %.15g ok=%v, want %.15g", trial, got, ok, c0)
		}
	}
}

// TestFitMeanEvenGrid: on n readings evenly spread over a period the sines
// and cosines of harmonics 1 and 2 are orthogonal to the constant (the
// discrete Fourier basis), so the fit's constant is the plain mean.
func TestFitMeanEvenGrid(t *testing.T) {
	const fr = 4.0
	n := 7
	ts := make([]float64, n)
	vs := make([]float64, n)
	var sum float64
	for i := range ts {
		ts[i] = float64(i) / (fr * float64(n))
		vs[i] = rmsOutput(0.4, fr, 0.3, ts[i]) + 0.01*math.Sin(float64(i*i))
		sum += vs[i]
	}
	got, ok := FitMean(ts, vs, fr, FitHarmonics)
	if !ok || math.Abs(got-sum/float64(n)) > 1e-12 {
		t.Fatalf("fit %.15g ok=%v, mean %.15g", got, ok, sum/float64(n))
	}
}

// TestFitMeanLateReadings: five readings of a converter output at 2 Hz
// on a 0.15 s converter (ripple a = 0.256 on the mean square at 4 Hz,
// RippleRel), planned a fifth of a ripple period apart and each taken up
// to 10 ms late, as a loaded host takes them. The plain mean errs by
// several tenths of a percent; the fit at the actual times leaves only
// what the delays make of the third harmonic (a³/64, from the Taylor
// series of √(1 + u)), which on five even phases aliases onto the
// second and, shifted by up to 3·2π·fr·δ, leaks at most that fraction of
// itself into the constant.
func TestFitMeanLateReadings(t *testing.T) {
	const f, tau = 2.0, 0.15
	fr := 2 * f
	a := 2 * RippleRel(f, tau) // RippleRel is on the RMS output: a/2
	want := trueMean(a)
	rng := rand.New(rand.NewPCG(3, 4))
	const lateS = 0.010
	var worstMean, worstFit float64
	for trial := 0; trial < 200; trial++ {
		phi := rng.Float64() * 2 * math.Pi
		n := MinFitReadings
		ts := make([]float64, n)
		vs := make([]float64, n)
		var sum float64
		for i := range ts {
			ts[i] = float64(i)/(fr*float64(n)) + lateS*rng.Float64()
			vs[i] = rmsOutput(a, fr, phi, ts[i])
			sum += vs[i]
		}
		got, ok := FitMean(ts, vs, fr, FitHarmonics)
		if !ok {
			t.Fatalf("trial %d: fit refused", trial)
		}
		worstFit = math.Max(worstFit, math.Abs(got/want-1))
		worstMean = math.Max(worstMean, math.Abs(sum/float64(n)/want-1))
	}
	t.Logf("worst relative error: mean %.3g, fit %.3g", worstMean, worstFit)
	if bound := a * a * a / 64 * 3 * 2 * math.Pi * fr * lateS; worstFit > bound {
		t.Errorf("fit off by %.3g, bound %.3g", worstFit, bound)
	}
	if worstMean < 1e-3 {
		t.Errorf("the late readings' plain mean is off by only %.3g: the test does not exercise the delays", worstMean)
	}
}

// TestFitMeanRefusesCrowded: readings bunched into a tenth of a period
// cannot tell the constant from the ripple; the fit says so and returns
// the mean.
func TestFitMeanRefusesCrowded(t *testing.T) {
	const fr = 4.0
	ts := []float64{0, 0.005, 0.01, 0.015, 0.02, 0.025}
	vs := make([]float64, len(ts))
	var sum float64
	for i, tt := range ts {
		vs[i] = rmsOutput(0.2, fr, 0, tt)
		sum += vs[i]
	}
	got, ok := FitMean(ts, vs, fr, FitHarmonics)
	if ok || got != sum/float64(len(ts)) {
		t.Fatalf("crowded readings: %g ok=%v, want the mean %g and ok=false", got, ok, sum/float64(len(ts)))
	}
	if _, ok := FitMean(ts[:4], vs[:4], fr, FitHarmonics); ok {
		t.Fatal("four readings fitted with five parameters")
	}
}
