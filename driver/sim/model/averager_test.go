package model

import (
	"math"
	"testing"
)

func sineMS(peak, freqHz float64) MeanSquare {
	return Analyze(Signal{Shape: Sine, FreqHz: freqHz, Vrms: peak / math.Sqrt2}, &DUT{}, 0, 0)
}

// First-order step response (handbook): after a step at t=0 the average
// reaches 1-e^{-t/τ} of its final value; after 5τ it is within
// e^{-5} ≈ 0.674 % of it.
func TestStepResponse(t *testing.T) {
	const tau = 0.4
	a := NewAverager(0, tau, 0)
	ms := sineMS(1, 1e6) // ripple at 2 MHz is negligible
	a.Set(0, ms, 0, tau, 0)
	for _, k := range []float64{0.5, 1, 2, 5, 10} {
		want := ms.C0 * (1 - math.Exp(-k))
		if got := a.Value(k * tau); math.Abs(got/want-1) > 1e-9 {
			t.Errorf("y(%gτ) = %g, want %g", k, got, want)
		}
	}
	deficit := 1 - a.Value(5*tau)/ms.C0
	if deficit > 0.00674 || deficit < 0.0067 {
		t.Errorf("after 5τ the deficit is %.5f %%, handbook e^-5 = 0.674 %%", 100*deficit)
	}
}

// The exact solution against a numerical solution of τy' = x² - y (RK4)
// with a sine input at a frequency low enough to ripple, and a
// frequency and time-constant change on the way.
func TestAgainstODE(t *testing.T) {
	type ev struct {
		t, freqHz, peak, tau float64
	}
	events := []ev{{0, 1, 1, 0.4}, {1.3, 3, 0.5, 0.4}, {2.1, 3, 0.5, 1.0}}
	a := NewAverager(0, 0.4, 0)
	// The model's phase reference is the signal start; the ODE uses the
	// same x(t) = P sin(2πf(t - ts)).
	ts := 0.0
	for i, e := range events {
		if i == 0 || e.freqHz != events[i-1].freqHz || e.peak != events[i-1].peak {
			ts = e.t
		}
		a.Set(e.t, sineMS(e.peak, e.freqHz), ts, e.tau, 0)
	}
	const dt = 1e-5
	y, tt := 0.0, 0.0
	cur := func(t float64) (ev, float64) {
		k, ts := 0, 0.0
		for i, e := range events {
			if t >= e.t {
				k = i
				if i == 0 || e.freqHz != events[i-1].freqHz || e.peak != events[i-1].peak {
					ts = e.t
				}
			}
		}
		return events[k], ts
	}
	deriv := func(t, y float64) float64 {
		e, ts := cur(t)
		x := e.peak * math.Sin(2*math.Pi*e.freqHz*(t-ts))
		return (x*x - y) / e.tau
	}
	worst := 0.0
	for step := 0; tt < 4; step++ {
		// Land exactly on events so that RK4 does not straddle one.
		h := dt
		for _, e := range events {
			if e.t > tt+1e-12 && e.t < tt+h {
				h = e.t - tt
			}
		}
		k1 := deriv(tt, y)
		k2 := deriv(tt+h/2, y+h/2*k1)
		k3 := deriv(tt+h/2, y+h/2*k2)
		k4 := deriv(tt+h-1e-13, y+h*k3)
		y += h / 6 * (k1 + 2*k2 + 2*k3 + k4)
		tt += h
		if step%1000 == 0 {
			worst = math.Max(worst, math.Abs(a.Value(tt)-y))
		}
	}
	if worst > 1e-8 {
		t.Errorf("exact solution differs from RK4 by up to %g V²", worst)
	}
}

// The steady-state ripple on the mean square, relative to its mean, is
// 1/√(1+(4πfτ)²) (derived in the package documentation); it falls as τ
// grows.
func TestRippleFormula(t *testing.T) {
	const f = 2.0
	prev := math.Inf(1)
	for _, tau := range []float64{0.05, 0.1, 0.4, 1, 2} {
		a := NewAverager(0, tau, 0)
		a.Set(0, sineMS(1, f), 0, tau, 0)
		t0 := 40 * tau // transient gone (e^-40)
		lo, hi := math.Inf(1), math.Inf(-1)
		for i := 0; i < 4000; i++ {
			v := a.Value(t0 + float64(i)/4000/f)
			lo, hi = math.Min(lo, v), math.Max(hi, v)
		}
		r := (hi - lo) / (hi + lo)
		want := 1 / math.Sqrt(1+math.Pow(4*math.Pi*f*tau, 2))
		if math.Abs(r/want-1) > 1e-5 {
			t.Errorf("τ=%g: ripple %g, formula %g", tau, r, want)
		}
		if r >= prev {
			t.Errorf("τ=%g: ripple %g did not fall (previous %g)", tau, r, prev)
		}
		prev = r
	}
}

// bruteMean is the midpoint rule with many points.
func bruteMean(a *Averager, t0, t1 float64, out Output, h Hold) float64 {
	return bruteMeanN(a, t0, t1, out, h, 400000)
}

func bruteMeanN(a *Averager, t0, t1 float64, out Output, h Hold, n int) float64 {
	var s float64
	for i := 0; i < n; i++ {
		s += a.At(t0+(float64(i)+0.5)/float64(n)*(t1-t0), out, h)
	}
	return s / float64(n)
}

// The aperture mean (Gauss-Legendre on adaptive pieces) against a brute
// midpoint sum, through ripple, a transient, an event inside the aperture
// and a hold.
func TestMeanOverAperture(t *testing.T) {
	sqrtOut := func(y float64, _ int) float64 { return math.Sqrt(math.Max(y, 0)) }
	a := NewAverager(0, 0.4, 0)
	a.Set(0, sineMS(1, 2), 0, 0.4, 0)
	a.Set(0.7, sineMS(2, 50), 0.7, 0.4, 0)
	a.Set(1.05, sineMS(2, 50), 0.7, 0.1, 1)
	hold := Hold{IntervalS: 1, DurationS: 0.05}
	for _, tc := range []struct {
		t0, t1 float64
		h      Hold
	}{
		{0.1, 0.3, Hold{}},  // 2 Hz ripple, transient
		{0.6, 0.8, Hold{}},  // event inside
		{0.95, 1.2, hold},   // hold at 1.0 s and a τ change
		{3, 3.0002, Hold{}}, // short aperture
		{2, 4, hold},        // two holds, 100 ripple periods
	} {
		got := a.Mean(tc.t0, tc.t1, sqrtOut, tc.h)
		want := bruteMean(a, tc.t0, tc.t1, sqrtOut, tc.h)
		if math.Abs(got/want-1) > 2e-7 {
			t.Errorf("[%g, %g]: mean %.10g, brute force %.10g", tc.t0, tc.t1, got, want)
		}
	}
	// A square wave through the demo DUT: 64 ripple terms, with and
	// without a transient, over whole periods and partial ones.
	sq := NewAverager(0, 0.1, 0)
	sq.Set(0, Analyze(Signal{Shape: Square, FreqHz: 1000, Vrms: 0.05}, demoDUT(), 0, 0), 0, 0.1, 0)
	if n := len(sq.segs[len(sq.segs)-1].filt); n < 30 {
		t.Fatalf("square wave has only %d ripple terms", n)
	}
	for _, iv := range [][2]float64{{0.05, 0.25}, {0.3001, 0.30035}, {5, 5.2}} {
		got := sq.Mean(iv[0], iv[1], sqrtOut, Hold{})
		want := bruteMeanN(sq, iv[0], iv[1], sqrtOut, Hold{}, 100000)
		if math.Abs(got/want-1) > 2e-7 {
			t.Errorf("square [%g, %g]: mean %.10g, brute force %.10g", iv[0], iv[1], got, want)
		}
	}
	// During a hold the output is the value at the start of the hold.
	if got, want := a.At(2.03, sqrtOut, hold), a.At(2, sqrtOut, Hold{}); got != want {
		t.Errorf("held output %g, want %g", got, want)
	}
	if a.Tag(1.1) != 1 || a.Tag(0.9) != 0 {
		t.Errorf("tags %d %d", a.Tag(0.9), a.Tag(1.1))
	}
}

func BenchmarkMeanSquareWave(b *testing.B) {
	sqrtOut := func(y float64, _ int) float64 { return math.Sqrt(y) }
	a := NewAverager(0, 0.1, 0)
	a.Set(0, Analyze(Signal{Shape: Square, FreqHz: 1000, Vrms: 0.05}, demoDUT(), 0, 0), 0, 0.1, 0)
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		a.Mean(0.5, 0.7, sqrtOut, Hold{})
	}
}

func BenchmarkMeanRipple(b *testing.B) {
	sqrtOut := func(y float64, _ int) float64 { return math.Sqrt(y) }
	a := NewAverager(0, 0.4, 0)
	a.Set(0, sineMS(1, 200), 0, 0.4, 0)
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		a.Mean(10, 10.2, sqrtOut, Hold{})
	}
}
