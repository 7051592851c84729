package model

import (
	"fmt"
	"math"
	"math/cmplx"
)

// Section kinds of a DUT's response, as written in a bench file.
const (
	// HighPass1 is a first-order high-pass at FreqHz: s/(s+ωc).
	HighPass1 = "highpass1"
	// LowPass1 is a first-order low-pass at FreqHz: ωc/(s+ωc).
	LowPass1 = "lowpass1"
	// HighPass2 is a second-order high-pass at FreqHz with quality factor
	// Q: s²/(s² + sωc/Q + ωc²).
	HighPass2 = "highpass2"
	// LowPass2 is a second-order low-pass at FreqHz with quality factor
	// Q: ωc²/(s² + sωc/Q + ωc²).
	LowPass2 = "lowpass2"
	// ButterworthHighPass is a Butterworth high-pass of order Order with
	// its -3.0103 dB point at FreqHz.
	ButterworthHighPass = "butterworth-highpass"
	// ButterworthLowPass is a Butterworth low-pass of order Order with
	// its -3.0103 dB point at FreqHz.
	ButterworthLowPass = "butterworth-lowpass"
)

// SectionKinds lists the accepted section kinds.
var SectionKinds = []string{HighPass1, LowPass1, HighPass2, LowPass2, ButterworthHighPass, ButterworthLowPass}

// MaxOrder is the highest Butterworth order accepted.
const MaxOrder = 20

// Section is one standard filter section.
type Section struct {
	Kind   string
	FreqHz float64
	Q      float64 // second-order kinds only
	Order  int     // Butterworth kinds only
}

// Response returns the section's complex response at freqHz (s = j2πf).
func (s Section) Response(freqHz float64) complex128 {
	if s.FreqHz <= 0 {
		return 1
	}
	// Normalised complex frequency s/ωc.
	sn := complex(0, freqHz/s.FreqHz)
	switch s.Kind {
	case HighPass1:
		return sn / (sn + 1)
	case LowPass1:
		return 1 / (sn + 1)
	case HighPass2:
		return sn * sn / (sn*sn + sn/complex(s.Q, 0) + 1)
	case LowPass2:
		return 1 / (sn*sn + sn/complex(s.Q, 0) + 1)
	case ButterworthLowPass, ButterworthHighPass:
		n := s.Order
		h := complex(1, 0)
		for k := 1; k <= n; k++ {
			// Normalised Butterworth poles, left half of the unit circle.
			p := cmplx.Exp(complex(0, math.Pi*float64(2*k+n-1)/float64(2*n)))
			if s.Kind == ButterworthLowPass {
				h *= -p / (sn - p)
			} else {
				// s -> 1/s maps the pole set onto itself (conjugates).
				h *= sn / (sn - p)
			}
		}
		return h
	}
	return 1
}

// Check reports what is wrong with the section, naming the field.
func (s Section) Check() (field string, err error) {
	known := false
	for _, k := range SectionKinds {
		known = known || s.Kind == k
	}
	if !known {
		return "kind", fmt.Errorf("%q: allowed %q", s.Kind, SectionKinds)
	}
	if !(s.FreqHz > 0) || math.IsInf(s.FreqHz, 0) {
		return "freq_hz", fmt.Errorf("%g: allowed > 0 Hz, finite", s.FreqHz)
	}
	switch s.Kind {
	case HighPass2, LowPass2:
		if !(s.Q > 0 && s.Q <= 1000) {
			return "q", fmt.Errorf("%g: allowed 0 < q <= 1000", s.Q)
		}
	case ButterworthHighPass, ButterworthLowPass:
		if s.Order < 1 || s.Order > MaxOrder {
			return "order", fmt.Errorf("%d: allowed 1..%d", s.Order, MaxOrder)
		}
	}
	return "", nil
}

// DUT is the device under test: a gain, a chain of sections, symmetric
// clipping and output noise.
type DUT struct {
	GainDB    float64
	Sections  []Section
	ClipV     float64 // output clips at ±ClipV; 0 = never
	NoiseVrms float64 // output noise, adds in power
}

// H returns the complex response at freqHz: the gain times the product of
// the sections' responses.
func (d *DUT) H(freqHz float64) complex128 {
	h := complex(math.Pow(10, d.GainDB/20), 0)
	for _, s := range d.Sections {
		h *= s.Response(freqHz)
	}
	return h
}

// GainDBAt returns 20·log10|H(f)|.
func (d *DUT) GainDBAt(freqHz float64) float64 {
	return 20 * math.Log10(cmplx.Abs(d.H(freqHz)))
}

// Corner search limits.
const (
	cornerLowHz  = 1e-4
	cornerHighHz = 1e10
)

// Corners returns the frequencies below and above refHz where the gain
// crosses GainDB(refHz)+levelDB (levelDB = -3 for the -3 dB corners),
// nearest to refHz, found by bracketing on a logarithmic grid and
// bisection. A side without a crossing between 0.1 mHz and 10 GHz is NaN.
func (d *DUT) Corners(refHz, levelDB float64) (lowHz, highHz float64) {
	target := d.GainDBAt(refHz) + levelDB
	g := func(lf float64) float64 { return d.GainDBAt(math.Pow(10, lf)) - target }
	search := func(from, to float64) float64 {
		const perDecade = 200
		n := int(math.Ceil(math.Abs(to-from) * perDecade))
		step := (to - from) / float64(n)
		a, ga := from, g(from)
		for i := 1; i <= n; i++ {
			b := from + float64(i)*step
			gb := g(b)
			if ga == 0 {
				return math.Pow(10, a)
			}
			if ga*gb < 0 || gb == 0 {
				for k := 0; k < 200 && math.Abs(b-a) > 1e-15; k++ {
					m := (a + b) / 2
					gm := g(m)
					if (gm < 0) == (ga < 0) {
						a, ga = m, gm
					} else {
						b = m
					}
				}
				return math.Pow(10, (a+b)/2)
			}
			a, ga = b, gb
		}
		return math.NaN()
	}
	lr := math.Log10(refHz)
	return search(lr, math.Log10(cornerLowHz)), search(lr, math.Log10(cornerHighHz))
}
