package plan

import (
	"math"
	"strconv"
)

// Fractional-octave bands, base 10 (IEC 61260-1:2014 §5.2): the octave
// frequency ratio is G = 10^(3/10) and the reference frequency 1000 Hz.
// The mid-band frequency of band x of a 1/b-octave filter set is
//
//	fm = 1000 · G^(x/b)          for odd b   (eq. 2)
//	fm = 1000 · G^((2x+1)/(2b))  for even b  (eq. 3)
//
// so fm = 1000 · 10^(N/D) with N/D = 3x/(10b) or 3(2x+1)/(20b) decades.
// Computing 10^(N/D) as an exact power of ten times 10^(remainder/D) keeps
// the decades (and 1 kHz on odd b) exact.

// bandReferenceHz is the reference frequency fr of the band sets.
const bandReferenceHz = 1000.0

// bandExponent returns N and D with fm = 1000 · 10^(N/D).
func bandExponent(x, b int) (n, d int) {
	if b%2 == 1 {
		return 3 * x, 10 * b
	}
	return 3 * (2*x + 1), 20 * b
}

// MidBandHz returns the exact mid-band frequency of band x of the
// 1/b-octave set (IEC 61260-1:2014 eqs. 2 and 3, base 10, fr = 1000 Hz).
// Band 0 is the 1 kHz band for odd b, the band just above 1 kHz for even b.
func MidBandHz(x, b int) float64 {
	n, d := bandExponent(x, b)
	q, r := floorDiv(n, d)
	v := bandReferenceHz * math.Pow10(q)
	if r != 0 {
		v *= math.Pow(10, float64(r)/float64(d))
	}
	return v
}

// r40 are the ISO 3 R40 preferred numbers in one decade, in hundredths
// (from memory). R10 is every fourth of them (1.00, 1.25, 1.60, 2.00, 2.50,
// 3.15, 4.00, 5.00, 6.30, 8.00), whose decade multiples are the ISO 266:1997
// preferred frequencies of the one-third-octave bands; every third R10
// value gives the octave bands. The odd members are the nominal mid-bands
// of the 1/2- and 1/6-octave sets, which fall on 10^((2i+1)/40).
var r40 = [40]int{
	100, 106, 112, 118, 125, 132, 140, 150, 160, 170,
	180, 190, 200, 212, 224, 236, 250, 265, 280, 300,
	315, 335, 355, 375, 400, 425, 450, 475, 500, 530,
	560, 600, 630, 670, 710, 750, 800, 850, 900, 950,
}

// Nominal returns the nominal mid-band frequency of band x of the
// 1/b-octave set: the ISO 266 preferred frequency (R10 series) for
// octave and one-third-octave bands, the R40 preferred number for 1/2- and
// 1/6-octave bands. 1/12- and 1/24-octave mid-bands fall between the R40
// numbers and have none (ok = false).
func Nominal(x, b int) (hz float64, ok bool) {
	if !validBands(b) {
		return 0, false
	}
	n, d := bandExponent(x, b)
	if (40*n)%d != 0 {
		return 0, false
	}
	q, r := floorDiv(40*n/d, 40)
	// r40[r]/100 · 10^(q+3) = r40[r] · 10^(q+1); written so that the
	// result is the correctly rounded decimal (e.g. 31.5, not 31.499…).
	e := q + 1
	if e >= 0 {
		return float64(r40[r]) * math.Pow10(e), true
	}
	return float64(r40[r]) / math.Pow10(-e), true
}

func validBands(b int) bool {
	switch b {
	case 1, 2, 3, 6, 12, 24:
		return true
	}
	return false
}

// bandRange returns band numbers bracketing every band whose exact or
// nominal mid-band may lie in [startHz, stopHz]; the caller filters.
func bandRange(startHz, stopHz float64, b int) (xLo, xHi int) {
	// In powers of G: e = log10(f/1000)/0.3; x ≈ b·e (odd) or b·e − 1/2
	// (even). Nominal values are within 2 % of the exact ones.
	e := func(f float64) float64 { return (math.Log10(f) - 3) / 0.3 }
	xLo = int(math.Floor(float64(b)*e(startHz/1.02))) - 2
	xHi = int(math.Ceil(float64(b)*e(stopHz*1.02))) + 2
	return xLo, xHi
}

// FormatHz writes a frequency in hertz for a label, rounded to sig
// significant figures, with a k or M suffix from 1 kHz and 1 MHz:
// 31.5, 1k, 1.25k, 12.5k, 2M.
func FormatHz(hz float64, sig int) string {
	if hz == 0 || math.IsNaN(hz) || math.IsInf(hz, 0) {
		return strconv.FormatFloat(hz, 'g', -1, 64)
	}
	r, _ := strconv.ParseFloat(strconv.FormatFloat(hz, 'e', sig-1, 64), 64)
	unit, div := "", 1.0
	switch a := math.Abs(r); {
	case a >= 1e6:
		unit, div = "M", 1e6
	case a >= 1e3:
		unit, div = "k", 1e3
	}
	v, _ := strconv.ParseFloat(strconv.FormatFloat(r/div, 'e', sig-1, 64), 64)
	return strconv.FormatFloat(v, 'f', -1, 64) + unit
}
