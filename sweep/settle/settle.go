// Package settle is the physics of an analog true-RMS converter seen by a
// sweep: how long its first-order mean-square average needs to settle after
// a step, how much ripple at twice the signal frequency survives into its DC
// output, which voltmeter aperture nulls that ripple, and when a run of
// readings may be trusted as converged (including the converter's periodic
// output hold).
//
// # Model
//
// The converter squares its input x(t), averages the square with a
// first-order low-pass of time constant τ (per range, physical seconds) and
// takes the square root:
//
//	τ·dy/dt = x(t)² − y(t),   reading r(t) = √y(t).
//
// # Dwell after a step (exact and first order)
//
// When the mean square steps from y0 to y1 = v1² (v the RMS value), the
// first-order response is
//
//	y(t) = y1 + (y0 − y1)·e^(−t/τ).
//
// The reading √y is within a relative tolerance ε of √y1 when
// (1−ε)²·y1 ≤ y ≤ (1+ε)²·y1, i.e. when
//
//	y − y1 ≤ (2ε + ε²)·y1   approaching from above (y0 > y1),
//	y1 − y ≤ (2ε − ε²)·y1   approaching from below (y0 < y1).
//
// Writing δ for the bound that applies (δ ≈ 2ε to first order),
//
//	|y0 − y1|·e^(−t/τ) = δ·y1   ⇒   t = τ·ln(|y0 − y1| / (δ·y1)),
//
// and t = 0 when |y0 − y1| ≤ δ·y1 already. In RMS terms
// t = τ·ln(|v0² − v1²| / (δ·v1²)). DwellS implements the exact form;
// DwellFirstOrderS the δ = 2ε form (handbook first-order step response,
// e.g. any control or circuits text: e^(−t/τ) decay to a fraction).
//
// # Ripple at 2f and the aperture that nulls it
//
// For x = A·sin(2πft), x² = (A²/2)·(1 − cos(2π·2f·t)): a mean square A²/2
// plus a component of the same amplitude at 2f. The first-order filter
// passes it with gain 1/√(1 + (2π·2f·τ)²), so the mean square carries a
// relative ripple
//
//	m = 1/√(1 + (4πfτ)²),   y(t) = Y·(1 + m·cos(4πft + φ)).
//
// The reading √y swings between √Y·√(1−m) and √Y·√(1+m), a relative
// amplitude a = (√(1+m) − √(1−m))/2 ≈ m/2 (RippleRel), about a mean that
// is itself low by ≈ m²/16 (MeanFactor).
//
// A voltmeter that integrates over an aperture T averages a sinusoid of
// frequency 2f with the weight |sin(π·2f·T)/(π·2f·T)| = |sinc(2fT)|
// (normalised sinc; the transfer function of a boxcar average), which is
// exactly zero when T = k/(2f). The residual relative ripple amplitude of a
// reading is therefore
//
//	a_T = a·|sin(2πfT)/(2πfT)|,
//
// and, with the reading's phase uniformly distributed, the scatter of
// single readings has the standard deviation a_T/√2 (the RMS of a sinusoid
// of amplitude a_T). The harmonics at 4f, 6f… that the square root adds are
// nulled by the same T. ChooseAperture picks the shortest aperture allowed
// when a_T is already small, and otherwise the shortest whole number k of
// ripple periods, T = k/(2f) (snapped to the meter's grid), that brings a_T
// under the target; past the meter's longest aperture it averages a burst
// of readings that together span whole ripple periods.
//
// # Hold
//
// Some converters freeze their output for HoldS once every HoldIntervalS.
// Readings taken inside one hold are identical and would fake
// convergence. Converge can demand that a window span more than the hold
// (Criterion.HoldS), so that one of its readings was live; that costs a
// hold per point, and the scheduler (sweep/sched) instead checks its
// windows against a probe reading and the model and learns the hold
// schedule. Converge's trend test (Criterion.TauS) refuses a window whose
// least-squares slope says the output is still more than Tol away from
// its final value: a first-order approach moving at dV/dt is
// τ·|dV/dt| from its end.
package settle

import (
	"errors"
	"fmt"
	"math"
)

// DwellS returns the exact time, in the units of tauS, for the RMS reading
// of a first-order mean-square converter to come within the relative
// tolerance tol of its final value after the RMS input steps from v0Vrms to
// v1Vrms. It is 0 when the step is already within the tolerance.
func DwellS(tauS, v0Vrms, v1Vrms, tol float64) float64 {
	if tauS <= 0 || tol <= 0 || v1Vrms <= 0 {
		return 0
	}
	y0, y1 := v0Vrms*v0Vrms, v1Vrms*v1Vrms
	var delta float64
	if y0 > y1 {
		delta = 2*tol + tol*tol
	} else {
		delta = 2*tol - tol*tol
	}
	ratio := math.Abs(y0-y1) / (delta * y1)
	if ratio <= 1 {
		return 0
	}
	return tauS * math.Log(ratio)
}

// DwellFirstOrderS is DwellS with the tolerance band in the mean square
// taken as 2·tol (first order in tol, the same from above and below).
func DwellFirstOrderS(tauS, v0Vrms, v1Vrms, tol float64) float64 {
	if tauS <= 0 || tol <= 0 || v1Vrms <= 0 {
		return 0
	}
	y0, y1 := v0Vrms*v0Vrms, v1Vrms*v1Vrms
	ratio := math.Abs(y0-y1) / (2 * tol * y1)
	if ratio <= 1 {
		return 0
	}
	return tauS * math.Log(ratio)
}

// Residual returns the relative error |√y(t)/v1 − 1| of the reading t
// seconds after a step from v0Vrms to v1Vrms on a converter of time
// constant tauS: the inverse of DwellS.
func Residual(tauS, v0Vrms, v1Vrms, tS float64) float64 {
	y0, y1 := v0Vrms*v0Vrms, v1Vrms*v1Vrms
	y := y1 + (y0-y1)*math.Exp(-tS/tauS)
	if y < 0 {
		y = 0
	}
	return math.Abs(math.Sqrt(y/y1) - 1)
}

// MeanSquareRipple returns m = 1/√(1+(4πfτ)²), the relative amplitude of
// the 2f component of the averaged mean square for a sine at freqHz.
func MeanSquareRipple(freqHz, tauS float64) float64 {
	w := 4 * math.Pi * freqHz * tauS
	return 1 / math.Sqrt(1+w*w)
}

// RippleRel returns the relative amplitude of the 2f ripple on the RMS
// reading, (√(1+m) − √(1−m))/2 with m = MeanSquareRipple (≈ m/2),
// relative to the mean reading (MeanFactor).
func RippleRel(freqHz, tauS float64) float64 {
	m := math.Min(1, MeanSquareRipple(freqHz, tauS))
	return (math.Sqrt(1+m) - math.Sqrt(1-m)) / 2 / meanSqrt(m)
}

// MeanFactor returns the mean of the rippling RMS output over a ripple
// period relative to the true RMS, mean(√(1+m·cos θ)) ≈ 1 − m²/16: the
// converter's own low-frequency bias, which no aperture removes (it is
// below 1e-4 once 4πfτ > 25).
func MeanFactor(freqHz, tauS float64) float64 {
	return meanSqrt(math.Min(1, MeanSquareRipple(freqHz, tauS)))
}

// meanSqrt is the mean of √(1+m·cos θ) over a period by the periodic
// trapezoid rule (spectrally accurate for a smooth periodic integrand).
func meanSqrt(m float64) float64 {
	const n = 64
	var s float64
	for k := 0; k < n; k++ {
		s += math.Sqrt(math.Max(0, 1+m*math.Cos(2*math.Pi*float64(k)/n)))
	}
	return s / n
}

// Sinc returns |sin(2πfT)/(2πfT)|, the attenuation of the 2f ripple by a
// voltmeter integrating over apertureS (1 for a zero aperture).
func Sinc(freqHz, apertureS float64) float64 {
	x := 2 * math.Pi * freqHz * apertureS
	if math.Abs(x) < 1e-9 {
		return 1
	}
	return math.Abs(math.Sin(x) / x)
}

// ResidualRippleRel returns the relative ripple amplitude left on one
// reading of aperture apertureS: RippleRel·Sinc.
func ResidualRippleRel(freqHz, tauS, apertureS float64) float64 {
	return RippleRel(freqHz, tauS) * Sinc(freqHz, apertureS)
}

// ReadingScatterRel returns the expected standard deviation, relative, of
// single readings of aperture apertureS caused by the ripple (taken at
// random phase): ResidualRippleRel/√2.
func ReadingScatterRel(freqHz, tauS, apertureS float64) float64 {
	return ResidualRippleRel(freqHz, tauS, apertureS) / math.Sqrt2
}

// Meter describes the apertures a voltmeter accepts: either a discrete
// list (NPLC settings converted to seconds) or a continuous interval.
type Meter struct {
	// AperturesS, when not empty, are the only apertures allowed, physical
	// seconds, ascending (e.g. NPLC values divided by the line frequency).
	AperturesS []float64
	// MinApertureS and MaxApertureS bound a continuously settable
	// aperture (used when AperturesS is empty).
	MinApertureS float64
	MaxApertureS float64
	// LineHz, when positive, says that the apertures are set in power-line
	// cycles (NPLC = aperture·LineHz).
	LineHz float64
	// OverheadS is the time a reading costs on top of its aperture
	// (trigger, conversion, transfer; on a meter of Singles, the query's
	// round trip).
	OverheadS float64
	// Fixed says that the integration time cannot be set: AperturesS
	// holds the instrument's own, one value, and nothing is sent.
	Fixed bool
	// Singles says that the meter takes no bursts: each reading is one
	// query, so that readings averaged into one value may be spaced (see
	// Reading.SpacingS).
	Singles bool
}

// NPLCMeter returns the meter of a voltmeter set in power-line cycles.
func NPLCMeter(nplc []float64, lineHz, overheadS float64) Meter {
	m := Meter{OverheadS: overheadS, LineHz: lineHz}
	for _, n := range nplc {
		m.AperturesS = append(m.AperturesS, n/lineHz)
	}
	return m
}

// Validate reports a meter description that cannot choose an aperture.
func (m Meter) Validate() error {
	if len(m.AperturesS) > 0 {
		for i, a := range m.AperturesS {
			if !(a > 0) || (i > 0 && !(a > m.AperturesS[i-1])) {
				return fmt.Errorf("settle: meter apertures %v s: want positive and ascending", m.AperturesS)
			}
		}
		return nil
	}
	if !(m.MinApertureS > 0) || !(m.MaxApertureS >= m.MinApertureS) {
		return fmt.Errorf("settle: meter apertures %g..%g s: want 0 < min <= max", m.MinApertureS, m.MaxApertureS)
	}
	return nil
}

// Shortest returns the shortest aperture allowed.
func (m Meter) Shortest() float64 {
	if len(m.AperturesS) > 0 {
		return m.AperturesS[0]
	}
	return m.MinApertureS
}

// Longest returns the longest aperture allowed.
func (m Meter) Longest() float64 {
	if len(m.AperturesS) > 0 {
		return m.AperturesS[len(m.AperturesS)-1]
	}
	return m.MaxApertureS
}

// Reading is how to read one point: the aperture, and how many readings to
// average into one value (Average > 1 only when a single aperture cannot
// span a ripple period).
type Reading struct {
	ApertureS float64
	Average   int
	// ResidualRel is the predicted relative ripple amplitude left on one
	// (averaged) value.
	ResidualRel float64
	// SpacingS, when positive, is the time from the start of one of the
	// Average readings to the start of the next (single readings of a
	// meter of Singles, spaced to null the ripple); 0: back to back.
	SpacingS float64
}

// TimeS returns the time one value costs on meter m.
func (r Reading) TimeS(m Meter) float64 {
	n := r.Average
	if n < 1 {
		n = 1
	}
	if r.SpacingS > 0 && n > 1 {
		return float64(n-1)*r.SpacingS + r.ApertureS + m.OverheadS
	}
	return float64(n) * (r.ApertureS + m.OverheadS)
}

// ErrNoAperture is returned when no aperture or burst the meter allows
// brings the ripple under the target.
var ErrNoAperture = errors.New("settle: no aperture reduces the ripple enough")

// ChooseAperture picks the reading for a sine at freqHz on a converter of
// time constant tauS so that the residual ripple amplitude is at most
// targetRel: the shortest aperture when that is enough (high
// frequencies); otherwise, on a continuous meter, the shortest
// T = k/(2f), k = 1, 2, … within its bounds (an exact null), or, on a
// discrete meter, the shortest allowed aperture whose residual meets the
// target; otherwise (the ripple period is beyond the longest aperture) a
// burst of back-to-back readings whose total span is close to a whole
// number of ripple periods. When nothing meets the target it returns the
// best found with ErrNoAperture.
func ChooseAperture(freqHz, tauS, targetRel float64, m Meter) (Reading, error) {
	if err := m.Validate(); err != nil {
		return Reading{}, err
	}
	amp := RippleRel(freqHz, tauS)
	t0 := m.Shortest()
	best := Reading{ApertureS: t0, Average: 1, ResidualRel: amp * Sinc(freqHz, t0)}
	if best.ResidualRel <= targetRel || !(freqHz > 0) {
		return best, nil
	}
	try := func(t float64) bool {
		res := amp * Sinc(freqHz, t)
		if res < best.ResidualRel {
			best = Reading{ApertureS: t, Average: 1, ResidualRel: res}
		}
		return res <= targetRel
	}
	if len(m.AperturesS) > 0 {
		for _, t := range m.AperturesS {
			if try(t) {
				return best, nil
			}
		}
	} else {
		period := 1 / (2 * freqHz) // the ripple period
		k := math.Max(1, math.Ceil(m.MinApertureS/period-1e-9))
		if t := k * period; t <= m.MaxApertureS*(1+1e-9) && try(math.Min(t, m.MaxApertureS)) {
			return best, nil
		}
	}
	// Burst: n readings of aperture t spaced p = t + overhead; the mean
	// is a comb of boxcars. Try each allowed aperture (a few on a
	// continuous meter) and the smallest n meeting the target; keep the
	// quickest burst.
	cands := m.AperturesS
	if len(cands) == 0 {
		cands = []float64{m.MinApertureS, (m.MinApertureS + m.MaxApertureS) / 2, m.MaxApertureS}
	}
	// A meter of single readings averages readings it times itself, which
	// a loaded host delays: a mean of two or three readings that nulls the
	// ripple on paper leaves a large part of it for a few milliseconds'
	// delay (at 2 Hz on a 0.15 s converter, 1 % for 5 ms). It takes at
	// least MinFitReadings, whose ripple FitMean removes at the times
	// they were actually taken.
	n0 := 2
	if m.Singles {
		n0 = MinFitReadings
	}
	var found *Reading
	for _, t := range cands {
		p := t + m.OverheadS
		for n := n0; n <= 1000; n++ {
			r, ok := burstReading(freqHz, t, p, n, amp, targetRel, m.Singles)
			if r.ResidualRel < best.ResidualRel {
				best = r
			}
			if ok {
				if found == nil || r.TimeS(m) < found.TimeS(m) {
					found = &r
				}
				break
			}
		}
	}
	if found != nil {
		return *found, nil
	}
	return best, ErrNoAperture
}

// burstReading returns the mean of n readings of aperture tS at the
// ripple amplitude amp: back to back, p apart, and, when spaced (a meter
// of single readings), also the shortest spacing not under p that puts
// the n readings on n distinct whole fractions of the ripple period (k/n
// periods apart, k prime to n), a null of the comb (sin(nπ·2f·s) = 0,
// sin(π·2f·s) ≠ 0), keeping the better of the two. ok reports that it meets targetRel.
func burstReading(freqHz, tS, p float64, n int, amp, targetRel float64, spaced bool) (r Reading, ok bool) {
	r = Reading{ApertureS: tS, Average: n, ResidualRel: amp * burstAtten(freqHz, tS, p, n)}
	if spaced && r.ResidualRel > targetRel {
		k := math.Ceil(p*2*freqHz*float64(n) - 1e-9)
		for gcd(int(k), n) != 1 { // n distinct phases of the ripple
			k++
		}
		s := k / (2 * freqHz * float64(n))
		if res := amp * burstAtten(freqHz, tS, s, n); res < r.ResidualRel {
			r = Reading{ApertureS: tS, Average: n, ResidualRel: res, SpacingS: s}
		}
	}
	return r, r.ResidualRel <= targetRel
}

// gcd returns the greatest common divisor of a and b.
func gcd(a, b int) int {
	for b != 0 {
		a, b = b, a%b
	}
	return a
}

// burstAtten is the attenuation of a sinusoid at 2f by the mean of n
// boxcar readings of aperture t spaced p apart: |sinc(2ft)| times the
// Dirichlet kernel |sin(nπ2fp)/(n·sin(π2fp))|.
func burstAtten(freqHz, tS, pS float64, n int) float64 {
	a := Sinc(freqHz, tS)
	x := math.Pi * 2 * freqHz * pS
	s := math.Sin(x)
	if math.Abs(s) < 1e-12 {
		return a
	}
	return a * math.Abs(math.Sin(float64(n)*x)/(float64(n)*s))
}

// BurstAtten is the exported form of the burst attenuation for tests and
// estimates: the mean of n readings of aperture tS spaced pS apart.
func BurstAtten(freqHz, tS, pS float64, n int) float64 { return burstAtten(freqHz, tS, pS, n) }
