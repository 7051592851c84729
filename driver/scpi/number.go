package scpi

import (
	"fmt"
	"math"
	"strconv"
	"strings"

	"rolloff/driver"
)

// SCPI special values in numeric responses (SCPI-1999 Vol 1 §7.2.1).
const (
	// Overload is +INFinity: an overload on the input (§7.2.1.4, from memory).
	Overload = 9.9e37
	// NegativeOverload is NINFinity (§7.2.1.4, from memory).
	NegativeOverload = -9.9e37
	// NotANumber is NAN, e.g. a missing or invalid reading (§7.2.1.5, from memory).
	NotANumber = 9.91e37
)

// maxQuoted is how much of a bad response an error message quotes.
const maxQuoted = 40

// NumberError is a numeric response that is not a finite number: Err is
// driver.ErrMalformed, driver.ErrOverload, driver.ErrNegativeOverload or
// driver.ErrNotANumber.
type NumberError struct {
	Text   string // the response, truncated to a sane length
	Reason string
	Err    error
}

// Error quotes the response and says why it is not a number.
func (e *NumberError) Error() string {
	return fmt.Sprintf("scpi: response %q: %s: %v", e.Text, e.Reason, e.Err)
}

// Unwrap returns the sentinel.
func (e *NumberError) Unwrap() error { return e.Err }

func quoteable(s string) string {
	if len(s) > maxQuoted {
		return s[:maxQuoted] + "..."
	}
	return s
}

func numberError(s, reason string, err error) error {
	return &NumberError{Text: quoteable(s), Reason: reason, Err: err}
}

// ParseNumber parses a numeric response in any decimal form of IEEE 488.2
// (NR1 integer, NR2 fixed point, NR3 floating point: §8.7.2-8.7.4; read
// with the tolerance of NRf, §7.7.2: sign, leading and trailing white
// space, white space around the exponent mark). The SCPI special values map
// to errors: 9.9E37 wraps driver.ErrOverload, -9.9E37
// driver.ErrNegativeOverload, 9.91E37 driver.ErrNotANumber, in any
// spelling (99E36, 9.90000E+37 ...), as do the mnemonics INF, NINF and NAN.
// Anything else wraps driver.ErrMalformed. A nil error means a finite float.
func ParseNumber(s string) (float64, error) {
	t := strings.TrimSpace(s)
	if t == "" {
		return 0, numberError(s, "empty", driver.ErrMalformed)
	}
	switch strings.ToUpper(t) {
	case "INF", "+INF", "INFINITY", "+INFINITY":
		return 0, numberError(s, "SCPI +INF (overload)", driver.ErrOverload)
	case "NINF", "-INF", "NINFINITY", "-INFINITY":
		return 0, numberError(s, "SCPI NINF (negative overload)", driver.ErrNegativeOverload)
	case "NAN":
		return 0, numberError(s, "SCPI NAN (not a number)", driver.ErrNotANumber)
	}
	clean, reason := scanNRf(t, true)
	if reason != "" {
		return 0, numberError(s, reason, driver.ErrMalformed)
	}
	v, err := strconv.ParseFloat(clean, 64)
	if err != nil || math.IsInf(v, 0) || math.IsNaN(v) {
		return 0, numberError(s, "beyond the range of a float64", driver.ErrMalformed)
	}
	switch v {
	case Overload:
		return 0, numberError(s, "SCPI 9.9E37 = +INF (overload)", driver.ErrOverload)
	case NegativeOverload:
		return 0, numberError(s, "SCPI -9.9E37 = NINF (negative overload)", driver.ErrNegativeOverload)
	case NotANumber:
		return 0, numberError(s, "SCPI 9.91E37 = NAN (not a number)", driver.ErrNotANumber)
	}
	return v, nil
}

// scanNRf checks t (already trimmed) against the NRf grammar (IEEE 488.2
// §7.7.2.2) and returns it without inner white space, or why it is not a
// number. spaces allows white space around the exponent mark.
func scanNRf(t string, spaces bool) (string, string) {
	i := 0
	var b strings.Builder
	if i < len(t) && (t[i] == '+' || t[i] == '-') {
		b.WriteByte(t[i])
		i++
	}
	digits := 0
	for i < len(t) && isDigit(t[i]) {
		b.WriteByte(t[i])
		i++
		digits++
	}
	if i < len(t) && t[i] == '.' {
		b.WriteByte('.')
		i++
		for i < len(t) && isDigit(t[i]) {
			b.WriteByte(t[i])
			i++
			digits++
		}
	}
	if digits == 0 {
		if i == len(t) {
			return "", "no digits"
		}
		return "", fmt.Sprintf("byte %d (%q): want a digit", i, t[i])
	}
	if i == len(t) {
		return b.String(), ""
	}
	j := i
	if spaces {
		for j < len(t) && isSpace(t[j]) {
			j++
		}
	}
	if j < len(t) && (t[j] == 'E' || t[j] == 'e') {
		b.WriteByte('E')
		j++
		if spaces {
			for j < len(t) && isSpace(t[j]) {
				j++
			}
		}
		if j < len(t) && (t[j] == '+' || t[j] == '-') {
			b.WriteByte(t[j])
			j++
		}
		exp := 0
		for j < len(t) && isDigit(t[j]) {
			b.WriteByte(t[j])
			j++
			exp++
		}
		if exp == 0 {
			return "", "exponent without digits"
		}
		if j == len(t) {
			return b.String(), ""
		}
		return "", fmt.Sprintf("byte %d (%q): unexpected after the exponent", j, t[j])
	}
	return "", fmt.Sprintf("byte %d (%q): unexpected after the mantissa", i, t[i])
}

func isDigit(c byte) bool { return '0' <= c && c <= '9' }
func isSpace(c byte) bool { return c == ' ' || c == '\t' }

// FormatNumber writes a finite v as decimal numeric program data (NR2 or
// NR3, IEEE 488.2 §7.7.2) with the fewest digits that read back to exactly
// v: plain decimals from 1E-4 up to 1E15, an exponent outside. It refuses
// NaN, ±Inf and magnitudes of 9.9E37 and beyond, which SCPI reserves for its
// infinity and not-a-number codes.
func FormatNumber(v float64) (string, error) {
	switch {
	case math.IsNaN(v) || math.IsInf(v, 0):
		return "", fmt.Errorf("%v is not a finite number", v)
	case math.Abs(v) >= Overload:
		return "", fmt.Errorf("%g is at or beyond 9.9E37, which SCPI reads as infinity", v)
	case v == 0:
		return "0", nil
	}
	if a := math.Abs(v); a >= 1e-4 && a < 1e15 {
		return strconv.FormatFloat(v, 'f', -1, 64), nil
	}
	return strconv.FormatFloat(v, 'E', -1, 64), nil
}
