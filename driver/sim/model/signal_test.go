package model

import (
	"math"
	"testing"
)

// idealWave returns the unit-peak ideal waveform at phase p (cycles).
func idealWave(s Shape, p float64) float64 {
	p -= math.Floor(p)
	switch s {
	case Square:
		if p < 0.5 {
			return 1
		}
		return -1
	case Triangle:
		// Rises from 0 to 1 at p = 1/4, falls to -1 at 3/4.
		switch {
		case p < 0.25:
			return 4 * p
		case p < 0.75:
			return 2 - 4*p
		}
		return 4*p - 4
	}
	return math.Sin(2 * math.Pi * p)
}

// rmsNumeric integrates the definition RMS = √(1/T ∫ x² dt).
func rmsNumeric(f func(p float64) float64) float64 {
	const n = 200000
	var s float64
	for i := 0; i < n; i++ {
		v := f((float64(i) + 0.5) / n)
		s += v * v
	}
	return math.Sqrt(s / n)
}

// Definition of RMS (handbook): a sine of peak P has RMS P/√2, a square
// P, a triangle P/√3.
func TestRMSOfWaveforms(t *testing.T) {
	want := map[Shape]float64{Sine: 1 / math.Sqrt2, Square: 1, Triangle: 1 / math.Sqrt(3)}
	flat := &DUT{}
	for s, w := range want {
		got := rmsNumeric(func(p float64) float64 { return idealWave(s, p) })
		if math.Abs(got-w) > 1e-6 {
			t.Errorf("%v: numeric RMS %g, handbook %g", s, got, w)
		}
		if math.Abs(1/s.Crest()-w) > 1e-15 {
			t.Errorf("%v: crest factor %g, want %g", s, s.Crest(), 1/w)
		}
		// The model's Fourier series through a flat DUT: the mean square
		// of a 1 V-peak waveform.
		ms := Analyze(Signal{Shape: s, FreqHz: 1000, Vrms: w}, flat, 0, 0)
		if math.Abs(math.Sqrt(ms.C0)-w) > 1e-12 {
			t.Errorf("%v: model RMS %g, want %g", s, math.Sqrt(ms.C0), w)
		}
		// And the synthesised waveform is the ideal one (away from the
		// square's edges, where the truncated series rings).
		y := Waveform(Signal{Shape: s, FreqHz: 1000, Vrms: w}, flat, 0)
		worst := 0.0
		for i, v := range y {
			p := float64(i) / float64(len(y))
			if s == Square && (math.Abs(p-0.5) < 0.01 || p < 0.01 || p > 0.99) {
				continue
			}
			worst = math.Max(worst, math.Abs(v-idealWave(s, p)))
		}
		if tol := map[Shape]float64{Sine: 1e-12, Square: 0.02, Triangle: 1e-3}[s]; worst > tol {
			t.Errorf("%v: synthesised waveform off the ideal by %g", s, worst)
		}
	}
}

// A square wave ±A of period T through a first-order low-pass (time
// constant τ) settles to exponential arcs between ±V0, V0 = A·tanh(T/4τ)
// (circuit theory); its mean square is integrated here in the time domain
// and compared with the model's Fourier series with its tail.
func TestSquareThroughRC(t *testing.T) {
	const fc = 1000.0
	tau := 1 / (2 * math.Pi * fc)
	d := &DUT{Sections: []Section{{Kind: LowPass1, FreqHz: fc}}}
	for _, f := range []float64{50, 300, 1000, 5000} {
		T := 1 / f
		h := T / 2
		v0 := math.Tanh(h / (2 * tau))
		// Rising half period: v = 1 - (1+V0) e^{-t/τ}.
		const n = 200000
		var s float64
		for i := 0; i < n; i++ {
			tt := (float64(i) + 0.5) / n * h
			v := 1 - (1+v0)*math.Exp(-tt/tau)
			s += v * v
		}
		exact := s / n
		ms := Analyze(Signal{Shape: Square, FreqHz: f, Vrms: 1}, d, 0, 0)
		if math.Abs(ms.C0/exact-1) > 2e-6 {
			t.Errorf("f=%g: model mean square %.9g, time domain %.9g", f, ms.C0, exact)
		}
	}
}

// Clipped sine: the closed form against the definition, integrated.
func TestClippedSine(t *testing.T) {
	for _, ratio := range []float64{1, 0.99, 0.7, 0.3, 0.05} {
		const p = 2.0
		v := ratio * p
		num := rmsNumeric(func(q float64) float64 {
			return math.Max(-v, math.Min(v, p*math.Sin(2*math.Pi*q)))
		})
		if got := ClippedSineMS(p, v); math.Abs(got/(num*num)-1) > 1e-8 {
			t.Errorf("clip at %g of peak: %g, numeric %g", ratio, got, num*num)
		}
	}
	// Through the DUT: +20 dB, clipping at ±12 V, 1 Vrms in: the output
	// would be 14.14 V peak.
	d := &DUT{GainDB: 20, ClipV: 12}
	ms := Analyze(Signal{Shape: Sine, FreqHz: 1000, Vrms: 1}, d, 0, 0)
	want := ClippedSineMS(10*math.Sqrt2, 12)
	if math.Abs(ms.C0/want-1) > 1e-12 {
		t.Errorf("clipped DUT output mean square %g, want %g", ms.C0, want)
	}
	if len(ms.Terms) == 0 || ms.Terms[0].K != 2 {
		t.Errorf("clipped sine terms %v, want the 2f ripple first", ms.Terms)
	}
}

// Clipped square and triangle waves go through the period grid. A square
// of peak 2 clipped at ±1 is a square of peak 1 (mean square 1); a
// triangle of peak 2 clipped at ±1 spends half of each quarter period on
// the ramp (mean square 1/3 there) and half at the rail: 1/6 + 1/2 = 2/3.
func TestClippedSquareTriangle(t *testing.T) {
	d := &DUT{ClipV: 1}
	for _, tc := range []struct {
		s    Shape
		want float64
	}{{Square, 1}, {Triangle, 2.0 / 3}} {
		ms := Analyze(Signal{Shape: tc.s, FreqHz: 1000, Vrms: 2 / tc.s.Crest()}, d, 0, 0)
		if math.Abs(ms.C0/tc.want-1) > 2e-3 {
			t.Errorf("%v clipped: mean square %g, want %g", tc.s, ms.C0, tc.want)
		}
	}
}

// Common practice: an average-responding meter is calibrated to read the
// RMS of a sine, reading mean|x| times the sine's form factor π/(2√2) ≈
// 1.1107; on a square wave it reads 1.111 times the true RMS. The model
// is true RMS and differs from it.
func TestAverageRespondingDiffers(t *testing.T) {
	ff := math.Pi / (2 * math.Sqrt2)
	flat := &DUT{}
	for _, tc := range []struct {
		s     Shape
		ratio float64 // average-responding reading / true RMS
		tol   float64
	}{
		{Sine, 1, 1e-6},
		{Square, 1.1107, 2e-3},
		{Triangle, ff * math.Sqrt(3) / 2, 1e-6}, // mean|x| = P/2, RMS = P/√3
	} {
		sig := Signal{Shape: tc.s, FreqHz: 1000, Vrms: 0.5}
		y := Waveform(sig, flat, 0)
		var mabs float64
		for _, v := range y {
			mabs += math.Abs(v)
		}
		mabs /= float64(len(y))
		avgResp := ff * mabs
		trueRMS := math.Sqrt(Analyze(sig, flat, 0, 0).C0)
		if math.Abs(trueRMS-0.5) > 1e-12 {
			t.Errorf("%v: true RMS %g, want 0.5", tc.s, trueRMS)
		}
		if got := avgResp / trueRMS; math.Abs(got-tc.ratio) > tc.tol {
			t.Errorf("%v: average-responding/true RMS = %.5f, want %.5f", tc.s, got, tc.ratio)
		}
	}
}

// The measuring input's first-order bandwidth halves the mean square at
// its corner.
func TestInputBandwidth(t *testing.T) {
	flat := &DUT{}
	ms := Analyze(Signal{Shape: Sine, FreqHz: 2e6, Vrms: 1}, flat, 2e6, 0)
	if math.Abs(ms.C0-0.5) > 1e-12 {
		t.Errorf("mean square at the input corner %g, want 0.5", ms.C0)
	}
	noisy := &DUT{NoiseVrms: 1e-3}
	off := Analyze(Signal{FreqHz: 1000}, noisy, 0, 0)
	if off.C0 != 1e-6 || len(off.Terms) != 0 {
		t.Errorf("output off: %+v, want only the noise power", off)
	}
}
