package settle

import (
	"bufio"
	"math"
	"os"
	"rolloff/driver"
	"strconv"
	"strings"
	"testing"
)

// integrate steps τ·dy/dt = u − y with the classical fourth-order
// Runge–Kutta method (any numerical-analysis handbook) and returns the
// first time the reading √y is within tol of √u, starting from y0.
func integrateDwell(tauS, y0, u, tol float64) float64 {
	h := tauS / 2000
	y, t := y0, 0.0
	f := func(y float64) float64 { return (u - y) / tauS }
	for t < 100*tauS {
		if math.Abs(math.Sqrt(y/u)-1) <= tol {
			return t
		}
		k1 := f(y)
		k2 := f(y + h/2*k1)
		k3 := f(y + h/2*k2)
		k4 := f(y + h*k3)
		y += h / 6 * (k1 + 2*k2 + 2*k3 + k4)
		t += h
	}
	return math.Inf(1)
}

func TestDwellAgainstODE(t *testing.T) {
	// Source: the step response of a first-order system, integrated
	// numerically (RK4), independent of the closed form in DwellS.
	cases := []struct{ tau, v0, v1, tol float64 }{
		{1, 1, 2, 1e-3},
		{1, 2, 1, 1e-3},
		{0.3, 0.05, 0.0158, 1e-3},
		{2, 0.01, 0.1, 1e-4},
		{1, 1, 1.0005, 1e-3}, // already inside
		{0.5, 1, 0.9, 0.01},
	}
	for _, c := range cases {
		want := integrateDwell(c.tau, c.v0*c.v0, c.v1*c.v1, c.tol)
		got := DwellS(c.tau, c.v0, c.v1, c.tol)
		if math.Abs(got-want) > c.tau/500 {
			t.Errorf("DwellS(%g, %g→%g, %g) = %.5f s, RK4 %.5f s", c.tau, c.v0, c.v1, c.tol, got, want)
		}
		if got > 0 {
			if r := Residual(c.tau, c.v0, c.v1, got); math.Abs(r-c.tol) > 1e-9 {
				t.Errorf("Residual at DwellS = %g, want %g", r, c.tol)
			}
		}
		// The first-order form differs from the exact one by
		// τ·ln(δ/2ε) ≈ ±τ·ε/2.
		fo := DwellFirstOrderS(c.tau, c.v0, c.v1, c.tol)
		if got > 0 && math.Abs(fo-got) > c.tau*c.tol {
			t.Errorf("first-order dwell %g vs exact %g", fo, got)
		}
	}
}

func TestDwellWorkedExample(t *testing.T) {
	// Worked example (handbook exponential decay): the mean square steps
	// from 2 to 1 (v 1.414→1) with τ = 1 s, tolerance 0.1 %: the error
	// e^(−t)·1 must fall to 2.001e-3, t = ln(1/2.001e-3) = 6.2141 s.
	got := DwellS(1, math.Sqrt2, 1, 1e-3)
	want := math.Log(1 / 2.001e-3)
	if math.Abs(got-want) > 1e-9 {
		t.Fatalf("DwellS = %.6f, want %.6f", got, want)
	}
}

func loadRipple(t *testing.T) [][6]float64 {
	t.Helper()
	f, err := os.Open("testdata/ripple_scipy.csv")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	var rows [][6]float64
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		line := sc.Text()
		if strings.HasPrefix(line, "#") || strings.HasPrefix(line, "f_hz") || line == "" {
			continue
		}
		var r [6]float64
		for i, s := range strings.Split(line, ",") {
			v, err := strconv.ParseFloat(s, 64)
			if err != nil {
				t.Fatalf("ripple_scipy.csv: %q: %v", line, err)
			}
			r[i] = v
		}
		rows = append(rows, r)
	}
	return rows
}

func TestRippleAgainstScipy(t *testing.T) {
	// Source: testdata/ripple_scipy.csv, a steady-state simulation with
	// scipy.signal.lsim of sin² through 1/(τs+1), square root and a boxcar
	// aperture (gen_ripple.py beside it).
	rows := loadRipple(t)
	if len(rows) < 10 {
		t.Fatalf("only %d reference rows", len(rows))
	}
	for _, r := range rows {
		f, tau, T, rip, res := r[0], r[1], r[2], r[3], r[4]
		if got := RippleRel(f, tau); math.Abs(got-rip) > 2e-3*rip {
			t.Errorf("RippleRel(%g Hz, τ %g) = %.5e, scipy %.5e", f, tau, got, rip)
		}
		got := ResidualRippleRel(f, tau, T)
		// The square root adds a small 4f term that the boxcar attenuates
		// differently; allow 2 % of the unattenuated ripple.
		if math.Abs(got-res) > 0.02*rip {
			t.Errorf("ResidualRippleRel(%g Hz, τ %g, T %g) = %.5e, scipy %.5e", f, tau, T, got, res)
		}
		if got := MeanFactor(f, tau); math.Abs(got-r[5]) > 2e-5 {
			t.Errorf("MeanFactor(%g Hz, τ %g) = %.7f, scipy %.7f", f, tau, got, r[5])
		}
	}
}

func TestSincNulls(t *testing.T) {
	// Source: the boxcar (moving-average) transfer function
	// |sin(πνT)/(πνT)| is zero at ν = k/T (handbook signal processing).
	for _, f := range []float64{2, 7.5, 50} {
		for k := 1; k <= 3; k++ {
			if s := Sinc(f, float64(k)/(2*f)); s > 1e-12 {
				t.Errorf("Sinc(%g, %d/(2f)) = %g", f, k, s)
			}
		}
		if s := Sinc(f, 0.75/(2*f)); math.Abs(s-math.Abs(math.Sin(0.75*math.Pi)/(0.75*math.Pi))) > 1e-12 {
			t.Errorf("Sinc(%g, 0.75/(2f)) = %g", f, s)
		}
	}
}

func TestChooseAperture(t *testing.T) {
	m := NPLCMeter([]float64{0.02, 0.2, 1, 2, 2.5, 10}, 50, 0.002)
	// High frequency: the ripple is negligible, the shortest aperture.
	r, err := ChooseAperture(10e3, 0.1, 2.5e-4, m)
	if err != nil || r.ApertureS != m.Shortest() || r.Average != 1 {
		t.Errorf("10 kHz: %+v, %v; want the shortest aperture", r, err)
	}
	// 10 Hz, τ 0.1 s: ripple 4 %, needs T = k/20 s; 2.5 NPLC = 0.05 s.
	r, err = ChooseAperture(10, 0.1, 2.5e-4, m)
	if err != nil || math.Abs(r.ApertureS-0.05) > 1e-12 || r.ResidualRel > 2.5e-4 {
		t.Errorf("10 Hz: %+v, %v; want 0.05 s", r, err)
	}
	// 2 Hz: 1/(2f) = 0.25 s is no allowed aperture: a burst.
	m.AperturesS = m.AperturesS[:5]
	r, err = ChooseAperture(2, 0.5, 2.5e-4, m)
	if err != nil || r.Average < 2 || r.ResidualRel > 2.5e-4 {
		t.Errorf("2 Hz: %+v, %v; want a burst meeting the target", r, err)
	}
	if got := RippleRel(2, 0.5) * BurstAtten(2, r.ApertureS, r.ApertureS+m.OverheadS, r.Average); math.Abs(got-r.ResidualRel) > 1e-15 {
		t.Errorf("burst residual %g vs %g", got, r.ResidualRel)
	}
	// A continuous meter nulls exactly at 1/(2f).
	r, err = ChooseAperture(3, 0.2, 1e-5, Meter{MinApertureS: 0.001, MaxApertureS: 1})
	if err != nil || math.Abs(r.ApertureS-1/6.0) > 1e-12 || r.ResidualRel > 1e-12 {
		t.Errorf("3 Hz continuous: %+v, %v; want 1/6 s", r, err)
	}
	if _, err := ChooseAperture(10, 0.1, 1e-3, Meter{}); err == nil {
		t.Error("ChooseAperture accepted an empty meter")
	}
}

func TestConvergeHoldCannotFool(t *testing.T) {
	// A converter settling from 1.2 to 1.0 (τ 1 s) with a hold from 0.5 s
	// to 1.5 s: readings inside the hold are identical at the value frozen
	// at 0.5 s (0.2·e^−0.5 ≈ 12 % off).
	tau, hold0, holdS := 1.0, 0.5, 1.0
	val := func(ts float64) float64 {
		if ts >= hold0 && ts < hold0+holdS {
			ts = hold0
		}
		return math.Sqrt(1 + (1.44-1)*math.Exp(-ts/tau))
	}
	// Without the hold guard, three readings inside the hold converge on
	// the stale value.
	naive := NewConverge(Criterion{Tol: 1e-3, N: 3})
	var tsNaive float64
	for ts := 0.6; ts < 20; ts += 0.1 {
		if naive.Add(Sample{ts, val(ts)}) {
			tsNaive = ts
			break
		}
	}
	if tsNaive == 0 || tsNaive > hold0+holdS {
		t.Fatalf("test premise: the naive test converged at %g s", tsNaive)
	}
	// With the hold guard the accepted value is the settled one.
	cv := NewConverge(Criterion{Tol: 1e-3, N: 3, HoldS: holdS})
	for ts := 0.6; ts < 20; ts += 0.1 {
		if cv.Add(Sample{ts, val(ts)}) {
			break
		}
	}
	if !cv.Converged() {
		t.Fatal("never converged")
	}
	mean, _ := Stats(cv.Window())
	if math.Abs(mean-1) > 2e-3 {
		t.Errorf("accepted %g, want 1 within 2e-3 (window %v)", mean, cv.Window())
	}
}

func TestConvergeNotBefore(t *testing.T) {
	cv := NewConverge(Criterion{Tol: 1e-3, N: 2, NotBeforeS: 1})
	if cv.Add(Sample{0.2, 1}) || cv.Add(Sample{0.4, 1}) {
		t.Error("converged on readings before the dwell")
	}
	if cv.Add(Sample{1.1, 1}) {
		t.Error("converged with one reading after the dwell")
	}
	if !cv.Add(Sample{1.2, 1.0005}) {
		t.Error("did not converge on two agreeing readings after the dwell")
	}
}

func TestStatsTypeA(t *testing.T) {
	// JCGM 100:2008 §4.2: for 1, 2, 3, 4: mean 2.5, s = 1.29099,
	// s(mean) = 0.645497.
	w := []Sample{{0, 1}, {0, 2}, {0, 3}, {0, 4}}
	mean, rel := Stats(w)
	if mean != 2.5 || math.Abs(rel*2.5-0.6454972) > 1e-6 {
		t.Errorf("Stats = %g, %g", mean, rel*2.5)
	}
}

func TestPredictor(t *testing.T) {
	var p Predictor
	if _, ok := p.Predict(1); ok {
		t.Error("predicted with no history")
	}
	// A first-order low-pass well above its corner falls 20 dB/decade.
	p.Add(1000, 1)
	p.Add(10000, 0.1)
	v, _ := p.Predict(100000)
	if math.Abs(v-0.01) > 1e-12 {
		t.Errorf("Predict = %g, want 0.01", v)
	}
}

func TestPredictorGrowingSlope(t *testing.T) {
	// Entering a first-order low-pass roll-off, |H| = 1/√(1+(f/fc)²): a
	// straight line through the last two points underestimates the next
	// step; the growth-following prediction comes closer and errs on the
	// large side less than the step itself.
	fc := 20000.0
	h := func(f float64) float64 { return 1 / math.Sqrt(1+(f/fc)*(f/fc)) }
	var p Predictor
	fs := []float64{1000, 1778.28, 3162.28}
	for _, f := range fs {
		p.Add(f, h(f))
	}
	next := 5623.41
	got, _ := p.Predict(next)
	var lin Predictor
	lin.Add(fs[1], h(fs[1]))
	lin.Add(fs[2], h(fs[2]))
	linGot, _ := lin.Predict(next)
	want := h(next)
	if math.Abs(got-want) >= math.Abs(linGot-want) {
		t.Errorf("prediction %g (line %g), true %g", got, linGot, want)
	}
}

func TestTimingPointSeconds(t *testing.T) {
	tm := &Timing{
		Ranges:   []driver.Range{{Name: "a", FullScaleVrms: 0.1, TimeConstantS: 1}, {Name: "b", FullScaleVrms: 1, TimeConstantS: 0.5}},
		Window:   driver.Window{DCFullScaleV: 1, UnderFraction: 0.1, OverFraction: 1.05},
		Meter:    Meter{MinApertureS: 0.02, MaxApertureS: 2},
		Tol:      1e-3,
		Readings: 3,
	}
	// First point at 1 kHz, 50 mV (range a, τ 1 s): the dwell from zero,
	// ln(1/(2ε − ε²)) τ = 6.2151 s (first-order step response), plus
	// three 20 ms readings.
	got := tm.PointSeconds(0, 1000, 0, 0.05)
	want := math.Log(1/(2e-3-1e-6)) + 3*0.02
	if math.Abs(got-want) > 1e-9 {
		t.Errorf("first point %g s, want %g", got, want)
	}
	// Flat DUT: no dwell.
	if got := tm.PointSeconds(1000, 1200, 0.05, 0.05); math.Abs(got-0.06) > 1e-9 {
		t.Errorf("flat step %g s, want 0.06", got)
	}
	// A 20 dB/decade slope over a decade: a step of 10×, from the larger
	// value down: τ·ln(99/(2ε+ε²)).
	tm.SlopeDBPerDecade = 20
	got = tm.PointSeconds(1000, 10000, 0.5, 0.5)
	want = 0.5*math.Log(99/(2e-3+1e-6)) + 3*0.02
	if math.Abs(got-want) > 1e-9 {
		t.Errorf("decade step %g s, want %g", got, want)
	}
}
