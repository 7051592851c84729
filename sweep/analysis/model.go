package analysis

import (
	"fmt"
	"math"
	"strings"
)

// SectionKind is the kind of a standard section.
type SectionKind string

// Standard sections. In terms of u = f/f0:
//
//	LP1: |H|² = 1/(1+u²)              HP1: |H|² = u²/(1+u²)
//	LP2: |H|² = 1/((1−u²)² + u²/Q²)   HP2: |H|² = u⁴/((1−u²)² + u²/Q²)
//	BP2: |H|² = (u²/Q²)/((1−u²)² + u²/Q²)
//	Z1:  |H|² = 1+u²                  (a real zero; with an LP1, a shelf)
//	ZJ:  |H|² = (1−u²)²               (a pair of zeros on the jω axis: with
//	                                   an LP2, a notch or a stop-band zero)
//
// (standard filter handbook forms of the first- and second-order sections).
const (
	LowPass1  SectionKind = "lowpass1"
	HighPass1 SectionKind = "highpass1"
	LowPass2  SectionKind = "lowpass2"
	HighPass2 SectionKind = "highpass2"
	BandPass2 SectionKind = "bandpass2"
	Zero1     SectionKind = "zero1"
	ZeroPairJ SectionKind = "zeropair"
)

// Section is one fitted section.
type Section struct {
	Kind SectionKind `json:"kind"`
	FHz  float64     `json:"f_hz"`
	// Q is the quality factor of a second-order section; absent (0) for a
	// first-order one or a zero pair.
	Q float64 `json:"q,omitempty"`
}

// nParams is the number of shape parameters: ln f0, and ln Q for a
// second-order section with poles.
func (k SectionKind) nParams() int {
	if k == LowPass2 || k == HighPass2 || k == BandPass2 {
		return 2
	}
	return 1
}

// order is the number of poles of the section (zeros count 0).
func (k SectionKind) order() int {
	switch k {
	case LowPass2, HighPass2, BandPass2:
		return 2
	case Zero1, ZeroPairJ:
		return 0
	}
	return 1
}

func (k SectionKind) highPass() bool { return k == HighPass1 || k == HighPass2 }

// Describe renders s as a phrase: "second-order low-pass at 95 kHz, Q 0.71".
func (s Section) Describe() string {
	switch s.Kind {
	case Zero1:
		return "real zero at " + FormatHz(s.FHz, 3)
	case ZeroPairJ:
		return "zero pair on the jω axis at " + FormatHz(s.FHz, 3)
	case BandPass2:
		return fmt.Sprintf("second-order band-pass at %s, Q %.2f", FormatHz(s.FHz, 3), s.Q)
	}
	var b strings.Builder
	if s.Kind.order() == 2 {
		b.WriteString("second-order ")
	} else {
		b.WriteString("first-order ")
	}
	if s.Kind.highPass() {
		b.WriteString("high-pass")
	} else {
		b.WriteString("low-pass")
	}
	fmt.Fprintf(&b, " at %s", FormatHz(s.FHz, 3))
	if s.Kind.order() == 2 {
		fmt.Fprintf(&b, ", Q %.2f", s.Q)
	}
	return b.String()
}

const db10 = 10 / math.Ln10 // 10·log10(e): dB per neper of power

// sectionDB returns a section's gain in dB at ln(f) = lf, and its
// derivatives with respect to p = ln f0 and q = ln Q.
func sectionDB(k SectionKind, lf, p, q float64) (g, dp, dq float64) {
	lu := lf - p // ln u
	return sectionDBu(k, lu, math.Exp(2*lu), math.Exp(-2*q))
}

// sectionDBu is sectionDB given ln u, u² and 1/Q².
func sectionDBu(k SectionKind, lu, u2, iq2 float64) (g, dp, dq float64) {
	switch k {
	case LowPass1, HighPass1:
		// g = −10·log10(1+u²); du²/dp = −2u².
		g = -db10 * math.Log1p(u2)
		dp = db10 * 2 * u2 / (1 + u2)
		if k == HighPass1 {
			g += 2 * db10 * lu
			dp -= 2 * db10
		}
		return g, dp, 0
	case Zero1:
		return db10 * math.Log1p(u2), -db10 * 2 * u2 / (1 + u2), 0
	case ZeroPairJ:
		// g = 10·log10((1−u²)²); dg/dp = 10·log10(e)·4u²/(1−u²).
		a := 1 - u2
		return db10 * math.Log(a*a), db10 * 4 * u2 / a, 0
	default:
		a := 1 - u2
		d := a*a + u2*iq2
		g = -db10 * math.Log(d)
		// dD/du² = −2(1−u²) + 1/Q²; du²/dp = −2u²; dD/dq = −2u²/Q².
		dDdp := (-2*a + iq2) * (-2 * u2)
		dDdq := -2 * u2 * iq2
		dp = -db10 * dDdp / d
		dq = -db10 * dDdq / d
		switch k {
		case HighPass2:
			g += 4 * db10 * lu
			dp -= 4 * db10
		case BandPass2:
			// u²/Q²: + 10·log10(u²) − 20·log10(Q), q = ln Q.
			g += 2*db10*lu + db10*math.Log(iq2)
			dp -= 2 * db10
			dq -= 2 * db10
		}
		return g, dp, dq
	}
}

// Model is a gain times a cascade of standard sections.
type Model struct {
	GainDB   float64   `json:"gain_db"`
	Sections []Section `json:"sections"`
}

var _ curve = (*Model)(nil)

// At returns the model's gain at freqHz, dB.
func (m *Model) At(freqHz float64) float64 { return m.atLog(math.Log10(freqHz)) }

func (m *Model) atLog(x float64) float64 {
	lf := x * math.Ln10
	g := m.GainDB
	for _, s := range m.Sections {
		v, _, _ := sectionDB(s.Kind, lf, math.Log(s.FHz), math.Log(qOr1(s.Q)))
		g += v
	}
	return g
}

func (m *Model) slopeLog(x float64) float64 {
	// d/d(log10 f) = ln10 · d/d(ln f) = −ln10 · Σ ∂g/∂p, since every
	// section depends on ln f − ln f0 only.
	lf := x * math.Ln10
	var s float64
	for _, sec := range m.Sections {
		_, dp, _ := sectionDB(sec.Kind, lf, math.Log(sec.FHz), math.Log(qOr1(sec.Q)))
		s -= dp
	}
	return s * math.Ln10
}

func qOr1(q float64) float64 {
	if q > 0 {
		return q
	}
	return 1
}

// Describe renders the model as "second-order high-pass at 47 Hz, Q 0.71 ×
// second-order low-pass at 15.8 kHz, Q 0.71"; "flat" for no sections.
func (m *Model) Describe() string {
	if len(m.Sections) == 0 {
		return "flat"
	}
	parts := make([]string, len(m.Sections))
	for i, s := range m.Sections {
		parts[i] = s.Describe()
	}
	return strings.Join(parts, " × ")
}

// describeSections lists the model section by section, in words.
func describeSections(m Model) []string {
	out := make([]string, len(m.Sections))
	for i, s := range m.Sections {
		out[i] = s.Describe()
	}
	return out
}

// Order returns the number of poles on the high-pass (low-frequency) side
// and on the low-pass (high-frequency) side.
func (m *Model) Order() (lowSide, highSide int) {
	for _, s := range m.Sections {
		switch {
		case s.Kind == BandPass2:
			lowSide++
			highSide++
		case s.Kind.highPass():
			lowSide += s.Kind.order()
		default:
			highSide += s.Kind.order()
		}
	}
	return lowSide, highSide
}

// FormatHz renders a frequency with sig significant digits in Hz, kHz or
// MHz: "95.1 kHz".
func FormatHz(hz float64, sig int) string {
	unit, v := "Hz", hz
	switch a := math.Abs(hz); {
	case a >= 1e6:
		unit, v = "MHz", hz/1e6
	case a >= 1e3:
		unit, v = "kHz", hz/1e3
	}
	return fmt.Sprintf("%s %s", formatSig(v, sig), unit)
}

// formatSig formats v with sig significant digits, without exponent for
// the magnitudes a frequency display needs.
func formatSig(v float64, sig int) string {
	if v == 0 || math.IsNaN(v) || math.IsInf(v, 0) {
		return fmt.Sprint(v)
	}
	d := sig - 1 - int(math.Floor(math.Log10(math.Abs(v))))
	if d < 0 {
		d = 0
	}
	return fmt.Sprintf("%.*f", d, v)
}
