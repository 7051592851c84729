package settle

import (
	"math"
	"testing"
)

// rk4 integrates τ·dy/dt = u − y from y over dt with the classical
// fourth-order Runge–Kutta method (any numerical-analysis handbook),
// independent of the closed form in Averager.
func rk4(tauS, y, u, dt float64) float64 {
	const n = 4000
	h := dt / n
	f := func(y float64) float64 { return (u - y) / tauS }
	for i := 0; i < n; i++ {
		k1 := f(y)
		k2 := f(y + h/2*k1)
		k3 := f(y + h/2*k2)
		k4 := f(y + h*k3)
		y += h / 6 * (k1 + 2*k2 + 2*k3 + k4)
	}
	return y
}

func TestAveragerOneTimeConstant(t *testing.T) {
	// Handbook first-order step response: one time constant after a
	// step from 0 to 1 the state is 1 − 1/e = 0.6321205588…, after five
	// 1 − e⁻⁵ = 0.9932620530… (any circuits text, the RC charging curve).
	a := Averager{T: 2, Y: 0, U: 1}
	for _, c := range []struct{ t, want float64 }{{2, 0}, {3.5, 0.6321205588285577}, {9.5, 0.9932620530009145}} {
		if got := a.At(c.t, 1.5); math.Abs(got-c.want) > 1e-15 {
			t.Errorf("At(%g) = %.16g, want %.16g", c.t, got, c.want)
		}
	}
	if got := a.At(3, 0); got != 1 {
		t.Errorf("τ = 0: At = %g, want the input", got)
	}
	if r := RestAt(4, 0.25); r.At(100, 1) != 0.25 {
		t.Errorf("an averager at rest moved: %g", r.At(100, 1))
	}
}

func TestAveragerStepsAgainstODE(t *testing.T) {
	// A sequence of input steps (mean squares, held for dt each) on two
	// time constants: the chained closed form must follow the ODE
	// integrated numerically step by step.
	for _, tau := range []float64{0.2, 3} {
		steps := []struct{ u, dt float64 }{{0.0025, 0.7}, {1e-4, 0.05}, {0.01, 2.3}, {0, 0.4}, {0.0009, 5}}
		a := RestAt(0, 0)
		y, t0 := 0.0, 0.0
		for i, s := range steps {
			a = a.Step(t0, tau, s.u)
			y = rk4(tau, y, s.u, s.dt)
			t0 += s.dt
			if got := a.At(t0, tau); math.Abs(got-y) > 1e-12 {
				t.Errorf("τ %g, step %d: closed form %.12g, RK4 %.12g", tau, i, got, y)
			}
		}
	}
}

func TestAveragerStepKeepsPath(t *testing.T) {
	// A step to the same input at an intermediate time leaves the path
	// unchanged (the exponential's semigroup property).
	a := Averager{T: 1, Y: 4, U: 1}
	b := a.Step(1.7, 0.5, 1)
	for _, ts := range []float64{1.7, 2, 3.3} {
		if x, y := a.At(ts, 0.5), b.At(ts, 0.5); math.Abs(x-y) > 1e-14 {
			t.Errorf("t %g: %g vs %g", ts, x, y)
		}
	}
}

func TestStepTargetInverts(t *testing.T) {
	for _, c := range []struct{ tau, y0, u, ts float64 }{{0.3, 0, 0.0025, 0.15}, {2, 0.01, 1e-4, 0.4}, {1, 1, 1.21, 3}} {
		y := Averager{Y: c.y0, U: c.u}.At(c.ts, c.tau)
		if got := StepTarget(c.tau, c.y0, c.ts, y); math.Abs(got/c.u-1) > 1e-12 {
			t.Errorf("%+v: target %g", c, got)
		}
	}
	if !math.IsNaN(StepTarget(1, 0, 0, 1)) || !math.IsNaN(StepTarget(0, 0, 1, 1)) {
		t.Error("a reading at the step, or τ = 0, gave a target")
	}
}
