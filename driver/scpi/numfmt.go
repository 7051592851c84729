package scpi

import (
	"fmt"
	"math"
	"strconv"
)

// NumberFormat is how a profile writes numbers into commands: Digits
// significant digits (1 to 17; 0 means DefaultDigits), in NR3 form
// (mantissa and exponent, IEEE 488.2 §7.7.2) when NR3, else in the
// shortest decimal form that reads back to the rounded value.
type NumberFormat struct {
	Digits int
	NR3    bool
}

// DefaultDigits is the number of significant digits sent when a profile
// gives none: six, which every instrument input field takes and which
// resolves 1 ppm (common practice).
const DefaultDigits = 6

// MaxDigits is the most significant digits a float64 carries.
const MaxDigits = 17

// digits returns the digit count, defaulted.
func (f NumberFormat) digits() int {
	if f.Digits <= 0 {
		return DefaultDigits
	}
	if f.Digits > MaxDigits {
		return MaxDigits
	}
	return f.Digits
}

// Round returns v rounded to the format's significant digits: the value
// an instrument receives, and so the value to record.
func (f NumberFormat) Round(v float64) float64 {
	if v == 0 || math.IsNaN(v) || math.IsInf(v, 0) {
		return v
	}
	r, err := strconv.ParseFloat(strconv.FormatFloat(v, 'e', f.digits()-1, 64), 64)
	if err != nil {
		return v
	}
	return r
}

// Floor returns the largest value with the format's digits not above v:
// for a level that must not exceed a limit (an amplitude rounded up by
// a digit could cross it).
func (f NumberFormat) Floor(v float64) float64 {
	r := f.Round(v)
	if r <= v || v == 0 || math.IsNaN(v) || math.IsInf(v, 0) {
		return r
	}
	e := math.Floor(math.Log10(math.Abs(v)))
	return f.Round(r - math.Pow(10, e-float64(f.digits()-1)))
}

// Ceil returns the smallest value with the format's digits not below v.
func (f NumberFormat) Ceil(v float64) float64 { return -f.Floor(-v) }

// TowardZero returns the value with the format's digits nearest v whose
// magnitude is not above |v|.
func (f NumberFormat) TowardZero(v float64) float64 {
	if v < 0 {
		return f.Ceil(v)
	}
	return f.Floor(v)
}

// Text writes v (rounded) as numeric program data.
func (f NumberFormat) Text(v float64) (string, error) {
	r := f.Round(v)
	if f.NR3 {
		if _, err := FormatNumber(r); err != nil {
			return "", err
		}
		return strconv.FormatFloat(r, 'E', f.digits()-1, 64), nil
	}
	return FormatNumber(r)
}

// NumIn is Num written in format f (rounded to its digits). The caller
// records f.Round(v), the value sent.
func NumIn(name string, v float64, f NumberFormat) Arg {
	return Arg{name: name, kind: argNum, num: v, fmt: &f}
}

// String describes the format, for messages.
func (f NumberFormat) String() string {
	form := "shortest decimal"
	if f.NR3 {
		form = "NR3"
	}
	return fmt.Sprintf("%d significant digits, %s", f.digits(), form)
}
