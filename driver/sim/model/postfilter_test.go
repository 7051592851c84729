package model

import (
	"math"
	"testing"
)

// TestPostFilterStepResponse checks the averager behind a post-filter
// against the step response of two first-order lags in cascade, from
// rest: y2(t)/u = 1 − (τ1·e^(−t/τ1) − τ2·e^(−t/τ2))/(τ1 − τ2), and, for
// equal time constants, 1 − (1 + t/τ)·e^(−t/τ) (the overdamped and
// critically damped second-order step responses of any control
// handbook).
func TestPostFilterStepResponse(t *testing.T) {
	for _, c := range []struct{ tau1, tau2 float64 }{{0.4, 0.1}, {0.1, 0.4}, {0.4, 0.4}, {1, 1e-3}} {
		a := NewFilteredAverager(0, c.tau1, c.tau2, 0)
		a.Set(0, MeanSquare{C0: 1}, 0, c.tau1, 0)
		for _, ts := range []float64{0.01, 0.05, 0.2, 0.5, 1, 3} {
			var want float64
			if c.tau1 == c.tau2 {
				want = 1 - (1+ts/c.tau1)*math.Exp(-ts/c.tau1)
			} else {
				want = 1 - (c.tau1*math.Exp(-ts/c.tau1)-c.tau2*math.Exp(-ts/c.tau2))/(c.tau1-c.tau2)
			}
			if got := a.Value(ts); math.Abs(got-want) > 1e-5*math.Max(want, 1e-3) {
				t.Errorf("τ1 %g τ2 %g, t %g: %.9g, want %.9g", c.tau1, c.tau2, ts, got, want)
			}
		}
	}
}

// TestPostFilterAcrossEvents integrates the two lags numerically (RK4 on
// τ1·y' + y = u(t), τ2·y2' + y2 = y, a general-purpose method, step 1e-5
// s) through input changes with ripple and a change of time constant,
// and compares the averager's output and its aperture means.
func TestPostFilterAcrossEvents(t *testing.T) {
	const tau2 = 0.15
	type ev struct {
		t, tau float64
		ms     MeanSquare
	}
	evs := []ev{
		{0, 0.4, MeanSquare{C0: 1, FreqHz: 5, Terms: []Term{{K: 2, A: complex(0.5, 0)}}}},
		{0.7, 0.4, MeanSquare{C0: 0.3, FreqHz: 3, Terms: []Term{{K: 2, A: complex(0, -0.15)}}}},
		{1.3, 0.1, MeanSquare{C0: 2}},
	}
	a := NewFilteredAverager(0, evs[0].tau, tau2, 0)
	for _, e := range evs {
		a.Set(e.t, e.ms, 0, e.tau, 0)
	}
	// The input in force is the one at the middle of each RK4 step (the
	// events fall on step boundaries), so no step straddles a jump.
	var e ev
	input := func(t float64) (u, tau float64) {
		u = e.ms.C0
		for _, term := range e.ms.Terms {
			th := 2 * math.Pi * float64(term.K) * e.ms.FreqHz * t
			u += real(term.A)*math.Cos(th) - imag(term.A)*math.Sin(th)
		}
		return u, e.tau
	}
	const h = 1e-5
	y, y2 := 0.0, 0.0
	deriv := func(t, y, y2 float64) (float64, float64) {
		u, tau := input(t)
		return (u - y) / tau, (y - y2) / tau2
	}
	for i := 0; i < 250000; i++ {
		tt := float64(i) * h
		for _, x := range evs {
			if tt+h/2 >= x.t {
				e = x
			}
		}
		k1a, k1b := deriv(tt, y, y2)
		k2a, k2b := deriv(tt+h/2, y+h/2*k1a, y2+h/2*k1b)
		k3a, k3b := deriv(tt+h/2, y+h/2*k2a, y2+h/2*k2b)
		k4a, k4b := deriv(tt+h, y+h*k3a, y2+h*k3b)
		y += h / 6 * (k1a + 2*k2a + 2*k3a + k4a)
		y2 += h / 6 * (k1b + 2*k2b + 2*k3b + k4b)
		if n := i + 1; n%10000 == 0 {
			ts := float64(n) * h
			if got := a.Value(ts); math.Abs(got-y2) > 1e-6 {
				t.Errorf("t %.2f: output %.8f, RK4 %.8f", ts, got, y2)
			}
		}
	}
}
