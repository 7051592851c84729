package model

import (
	"math"
	"math/cmplx"

	"gonum.org/v1/gonum/dsp/fourier"
)

// Shape is a generator waveform.
type Shape int

// Waveforms.
const (
	Sine Shape = iota
	Square
	Triangle
)

// String returns the SCPI short form: SIN, SQU or TRI.
func (s Shape) String() string {
	switch s {
	case Sine:
		return "SIN"
	case Square:
		return "SQU"
	case Triangle:
		return "TRI"
	}
	return "?"
}

// Crest returns the crest factor peak/RMS of the ideal waveform: √2 for a
// sine, 1 for a square, √3 for a triangle (definition of RMS).
func (s Shape) Crest() float64 {
	switch s {
	case Square:
		return 1
	case Triangle:
		return math.Sqrt(3)
	}
	return math.Sqrt2
}

// harmonic returns the sine-series coefficient b_n of the unit-peak
// waveform x(t) = Σ b_n sin(nωt): square 4/(πn), triangle
// 8/(π²n²)·(-1)^((n-1)/2), both over odd n only (handbook Fourier series).
func (s Shape) harmonic(n int) float64 {
	switch s {
	case Sine:
		if n == 1 {
			return 1
		}
	case Square:
		if n%2 == 1 {
			return 4 / (math.Pi * float64(n))
		}
	case Triangle:
		if n%2 == 1 {
			b := 8 / (math.Pi * math.Pi * float64(n*n))
			if (n-1)/2%2 == 1 {
				b = -b
			}
			return b
		}
	}
	return 0
}

// Signal is the generator's output at the DUT input.
type Signal struct {
	Shape  Shape
	FreqHz float64
	Vrms   float64 // 0 when the output is off
}

// Term is one Fourier term of a mean square: Re(A e^{j2πKf(t-ts)}).
type Term struct {
	K int
	A complex128
}

// MeanSquare is the square u(t) = x(t)² of a measuring input's signal as
// a Fourier series: u = C0 + Σ Re(A_k e^{j2πK f (t-ts)}), ts being the
// time the signal started.
type MeanSquare struct {
	FreqHz float64
	C0     float64 // the mean square, V²
	Terms  []Term
}

// Grid and series sizes.
const (
	gridN = 4096 // samples per period for clipped or non-sine waveforms
	// MaxHarmonics is the highest harmonic synthesised for square and
	// triangle waves (the grid's Nyquist limit).
	MaxHarmonics = gridN/2 - 1
	maxTerms     = 64 // Fourier terms of x² kept for the ripple
)

// lowpass1 is a first-order low-pass at bwHz, 1 when bwHz is 0: the input
// bandwidth of a measuring instrument.
func lowpass1(freqHz, bwHz float64) complex128 {
	if bwHz <= 0 {
		return 1
	}
	return 1 / complex(1, freqHz/bwHz)
}

// ClippedSineMS returns the mean square of a sine of peak p clipped
// symmetrically at ±v: with θc = asin(v/p),
// (2/π)[p²(θc/2 - sin 2θc/4) + v²(π/2 - θc)] (integral of the clipped
// sine over a quarter period).
func ClippedSineMS(p, v float64) float64 {
	if v <= 0 || p <= v {
		return p * p / 2
	}
	th := math.Asin(v / p)
	return 2 / math.Pi * (p*p*(th/2-math.Sin(2*th)/4) + v*v*(math.Pi/2-th))
}

// seriesMS returns Σ b_n²/2 over all n, the mean square of the unit-peak
// waveform: 1/2, 1 and 1/3 (definition of RMS; Σ_odd 1/n² = π²/8 and
// Σ_odd 1/n⁴ = π⁴/96).
func seriesMS(s Shape) float64 {
	switch s {
	case Square:
		return 1
	case Triangle:
		return 1.0 / 3
	}
	return 0.5
}

// Analyze returns the Fourier series of the square of the signal seen by a
// measuring input of bandwidth bwHz (0 = unlimited) at the DUT output, the
// waveform built from at most harmonics harmonics (square and triangle).
// The DUT's noise adds to the mean square.
func Analyze(sig Signal, dut *DUT, bwHz float64, harmonics int) MeanSquare {
	noise := dut.NoiseVrms * dut.NoiseVrms
	ms := MeanSquare{FreqHz: sig.FreqHz, C0: noise}
	if sig.Vrms <= 0 || sig.FreqHz <= 0 {
		return ms
	}
	if harmonics < 1 || harmonics > MaxHarmonics {
		harmonics = MaxHarmonics
	}
	peak := sig.Vrms * sig.Shape.Crest()
	f := sig.FreqHz
	if sig.Shape == Sine {
		c := complex(peak, 0) * dut.H(f)
		if dut.ClipV <= 0 || cmplx.Abs(c) <= dut.ClipV {
			m := c * lowpass1(f, bwHz)
			p := cmplx.Abs(m)
			ms.C0 += p * p / 2
			ms.Terms = []Term{{K: 2, A: -complex(p*p/2, 0) * cmplx.Exp(complex(0, 2*cmplx.Phase(m)))}}
			return ms
		}
		harmonics = 1
	}
	// Complex amplitudes c_n of y = Σ Im(c_n e^{jnωt}) at the DUT output.
	cs := make([]complex128, harmonics+1)
	for n := 1; n <= harmonics; n++ {
		if b := sig.Shape.harmonic(n); b != 0 {
			cs[n] = complex(peak*b, 0) * dut.H(float64(n)*f)
		}
	}
	y := synthesize(cs)
	clipped := false
	if dut.ClipV > 0 {
		for i, v := range y {
			if v > dut.ClipV {
				y[i], clipped = dut.ClipV, true
			} else if v < -dut.ClipV {
				y[i], clipped = -dut.ClipV, true
			}
		}
	}
	var meas []float64
	var c0 float64
	if !clipped {
		// The series is exact for the mean square; the part of the
		// waveform beyond the last harmonic is added assuming |H·B|
		// constant beyond it.
		var partial, sum float64
		for n := 1; n <= harmonics; n++ {
			b := sig.Shape.harmonic(n)
			if b == 0 {
				continue
			}
			partial += b * b / 2
			m := cs[n] * lowpass1(float64(n)*f, bwHz)
			sum += real(m)*real(m)/2 + imag(m)*imag(m)/2
		}
		tail := seriesMS(sig.Shape) - partial
		if tail > 0 {
			last := cmplx.Abs(dut.H(float64(harmonics)*f) * lowpass1(float64(harmonics)*f, bwHz))
			sum += tail * peak * peak * last * last
		}
		c0 = sum
		for n := range cs {
			cs[n] *= lowpass1(float64(n)*f, bwHz)
		}
		meas = synthesize(cs)
	} else {
		meas = filterGrid(y, f, bwHz)
		if sig.Shape == Sine {
			// Exact mean square of the clipped sine, corrected by the
			// grid for the measuring bandwidth.
			exact := ClippedSineMS(cmplx.Abs(cs[1]), dut.ClipV)
			c0 = exact * meanSq(meas) / meanSq(y)
		} else {
			c0 = meanSq(meas)
		}
	}
	ms.C0 += c0
	ms.Terms = squareTerms(meas, c0)
	return ms
}

// synthesize returns one period of y = Σ Im(c_n e^{j2πni/N}) on the grid.
func synthesize(cs []complex128) []float64 {
	fft := fourier.NewFFT(gridN)
	coeff := make([]complex128, gridN/2+1)
	for n := 1; n < len(cs) && n < gridN/2; n++ {
		// Im(c e^{jθ}) = Re(-jc e^{jθ}); the inverse transform of a
		// half spectrum X gives Σ 2Re(X_n e^{jθ}) for n > 0.
		coeff[n] = -1i * cs[n] / 2
	}
	return fft.Sequence(nil, coeff)
}

// filterGrid applies the measuring input's first-order low-pass to one
// period of samples.
func filterGrid(y []float64, f, bwHz float64) []float64 {
	if bwHz <= 0 {
		return append([]float64(nil), y...)
	}
	fft := fourier.NewFFT(gridN)
	coeff := fft.Coefficients(nil, y)
	for k := range coeff {
		coeff[k] *= lowpass1(float64(k)*f, bwHz) / gridN
	}
	return fft.Sequence(nil, coeff)
}

func meanSq(y []float64) float64 {
	var s float64
	for _, v := range y {
		s += v * v
	}
	return s / float64(len(y))
}

// squareTerms returns the Fourier terms of y² that matter next to c0.
func squareTerms(y []float64, c0 float64) []Term {
	sq := make([]float64, len(y))
	for i, v := range y {
		sq[i] = v * v
	}
	fft := fourier.NewFFT(gridN)
	coeff := fft.Coefficients(nil, sq)
	var terms []Term
	for k := 1; k <= maxTerms && k < len(coeff); k++ {
		a := 2 * coeff[k] / gridN
		if cmplx.Abs(a) > 1e-12*c0 {
			terms = append(terms, Term{K: k, A: a})
		}
	}
	return terms
}

// Waveform returns one period of the DUT output (n samples, clipping
// applied) for tests and plots.
func Waveform(sig Signal, dut *DUT, harmonics int) []float64 {
	if harmonics < 1 || harmonics > MaxHarmonics {
		harmonics = MaxHarmonics
	}
	peak := sig.Vrms * sig.Shape.Crest()
	if sig.Shape == Sine {
		harmonics = 1
	}
	cs := make([]complex128, harmonics+1)
	for n := 1; n <= harmonics; n++ {
		if b := sig.Shape.harmonic(n); b != 0 {
			cs[n] = complex(peak*b, 0) * dut.H(float64(n)*sig.FreqHz)
		}
	}
	y := synthesize(cs)
	if dut.ClipV > 0 {
		for i, v := range y {
			y[i] = math.Max(-dut.ClipV, math.Min(dut.ClipV, v))
		}
	}
	return y
}
