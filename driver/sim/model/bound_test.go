package model

import (
	"math"
	"testing"
)

// First-order step response (handbook): from rest the average reaches
// 1 − e^{−t/τ} of its final value, within e^{−5} ≈ 0.674 % after 5τ. On
// the root that is within 1 − √(1 − e^{−5}); from above, a start at twice
// the final mean square is within 1 − (1 − e^{−5}) of it after 5τ.
func TestApproachHandbook(t *testing.T) {
	const tau = 0.4
	flat := MeanSquare{C0: 0.25}
	tol := 1 - math.Sqrt(1-math.Exp(-5))
	if got := ApproachS(0, flat, tau, tol); math.Abs(got/(5*tau)-1) > 1e-12 {
		t.Errorf("from rest: %g s, handbook 5τ = %g s", got, 5*tau)
	}
	tolUp := math.Sqrt(1+math.Exp(-5)) - 1
	if got := ApproachS(2*flat.C0, flat, tau, tolUp); math.Abs(got/(5*tau)-1) > 1e-12 {
		t.Errorf("from above: %g s, want 5τ = %g s", got, 5*tau)
	}
	if got := ApproachS(flat.C0*1.001, flat, tau, 0.002); got != 0 {
		t.Errorf("start within tolerance: %g s, want 0", got)
	}
	if got := ApproachS(0, MeanSquare{}, tau, 0.002); !math.IsInf(got, 1) {
		t.Errorf("nothing to settle to: %g, want +Inf", got)
	}
}

// The approach time against the exact averager with a rippling input:
// the mean of the state over one ripple period starting at t is
// C0 + D·e^{−t/τ}·(τ/T)(1 − e^{−T/τ}) (the integral of the exponential),
// so the ripple-averaged state m(t) = C0 + D·e^{−t/τ} is recovered from
// the averager and must sit on the tolerance at the computed time, both
// from rest and from a state above the final value.
func TestApproachAgainstAverager(t *testing.T) {
	const tau, f, tol = 0.4, 2.0, 0.002
	ms := sineMS(1, f) // ripple on the mean square ≈ 10 % at 2 Hz, τ = 0.4 s
	T := 1 / (2 * f)
	id := func(y float64, _ int) float64 { return y }
	for _, y0 := range []float64{0, 3 * ms.C0} {
		a := NewAverager(0, tau, 0)
		if y0 > 0 {
			a.Set(0, MeanSquare{C0: y0}, 0, tau, 0)
		}
		const t0 = 50 * tau // the start state has settled at y0
		a.Set(t0, ms, t0, tau, 0)
		ts := ApproachS(a.Value(t0), ms, tau, tol)
		if !(ts > 0) {
			t.Fatalf("y0=%g: approach %g s", y0, ts)
		}
		m := func(dt float64) float64 {
			mean := a.Mean(t0+dt, t0+dt+T, id, Hold{})
			return ms.C0 + (mean-ms.C0)*(T/tau)/(1-math.Exp(-T/tau))
		}
		if e := math.Abs(math.Sqrt(m(ts)/ms.C0) - 1); math.Abs(e/tol-1) > 1e-4 {
			t.Errorf("y0=%g: at the approach time the error is %g, want the tolerance %g", y0, e, tol)
		}
		if e := math.Abs(math.Sqrt(m(0.95*ts)/ms.C0) - 1); e <= tol {
			t.Errorf("y0=%g: already within tolerance (%g) at 0.95 of the approach time", y0, e)
		}
	}
}

// The worst-phase ripple of a reading against the exact aperture mean:
// a settled averager on a 2 Hz sine (τ = 0.4 s) read over apertures from
// an instant to a whole ripple period at 200 phases; the largest
// deviation from the whole-period mean matches RippleRel to first order
// in the ripple, and a whole ripple period nulls it.
func TestRippleRelAgainstMean(t *testing.T) {
	const tau, f = 0.4, 2.0
	ms := sineMS(1, f)
	a := NewAverager(0, tau, 0)
	a.Set(0, ms, 0, tau, 0)
	sq := func(y float64, _ int) float64 { return math.Sqrt(math.Max(y, 0)) }
	const t0 = 60 * tau
	T := 1 / (2 * f)
	ref := a.Mean(t0, t0+T, sq, Hold{})
	r := RippleRel(ms, tau, 0)
	if want := 1 / math.Sqrt(1+math.Pow(4*math.Pi*f*tau, 2)) / 2; math.Abs(r/want-1) > 1e-12 {
		t.Errorf("instantaneous ripple %g, package formula r/2 = %g", r, want)
	}
	for _, ap := range []float64{0.001, 0.05, 0.12, 0.2} {
		worst := 0.0
		for i := 0; i < 200; i++ {
			s := t0 + float64(i)/200*T
			worst = math.Max(worst, math.Abs(a.Mean(s, s+ap, sq, Hold{})/ref-1))
		}
		want := RippleRel(ms, tau, ap)
		// Second-order terms of the root are of order r²/8 ≈ 1e-3 of r.
		if math.Abs(worst-want) > 0.02*r {
			t.Errorf("aperture %g s: worst ripple %g, RippleRel %g", ap, worst, want)
		}
	}
	if got := RippleRel(ms, tau, T); got > 1e-12 {
		t.Errorf("a whole ripple period leaves %g", got)
	}
}

// ApertureS is the first aperture at which the ripple is within the
// tolerance: at it RippleRel equals the tolerance, just before it is
// above, and it never exceeds a whole ripple period; with negligible
// ripple it is the shortest aperture.
func TestApertureS(t *testing.T) {
	const tau, tol, minS = 0.4, 0.002, 0.02
	for _, f := range []float64{2, 5, 20} {
		ms := sineMS(1, f)
		ap := ApertureS(ms, tau, tol, minS)
		if ap > 1/(2*f)+1e-12 || ap < minS {
			t.Errorf("f=%g: aperture %g s outside [%g, %g]", f, ap, minS, 1/(2*f))
		}
		if r := RippleRel(ms, tau, ap); r > tol*(1+1e-9) {
			t.Errorf("f=%g: ripple %g at the aperture, tolerance %g", f, r, tol)
		}
		if ap > minS {
			if r := RippleRel(ms, tau, ap*0.999); r <= tol {
				t.Errorf("f=%g: a shorter aperture %g s already reaches %g", f, ap*0.999, r)
			}
		}
	}
	if ap := ApertureS(sineMS(1, 1e4), tau, tol, minS); ap != minS {
		t.Errorf("10 kHz: aperture %g s, want the shortest %g s", ap, minS)
	}
}
