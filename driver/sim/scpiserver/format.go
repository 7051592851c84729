package scpiserver

import (
	"math"
	"strconv"
	"strings"
)

// Special numeric responses (SCPI-1999 Vol 1 §7.2.1.5, §7.2.1.6).
const (
	Overflow     = 9.9e37  // +infinity, overload
	NotANumber   = 9.91e37 // NAN
	NegativeOver = -9.9e37 // -infinity
)

// NR3 formats v as <NR3 NUMERIC RESPONSE DATA> (IEEE 488.2 §8.7.4), e.g.
// "+9.48683000E-01". Infinities and NaN become the SCPI special values.
func NR3(v float64) string {
	switch {
	case math.IsNaN(v):
		v = NotANumber
	case math.IsInf(v, 1):
		v = Overflow
	case math.IsInf(v, -1):
		v = NegativeOver
	}
	s := strconv.FormatFloat(v, 'E', 8, 64)
	if v >= 0 && !strings.HasPrefix(s, "-") {
		s = "+" + s
	}
	return s
}

// NR3List formats values as a comma-separated list of NR3.
func NR3List(vs []float64) string {
	parts := make([]string, len(vs))
	for i, v := range vs {
		parts[i] = NR3(v)
	}
	return strings.Join(parts, ",")
}

// NR1 formats an integer (IEEE 488.2 §8.7.2).
func NR1(n int) string { return strconv.Itoa(n) }

// Bool formats boolean response data: "1" or "0" (SCPI-1999 §7.3).
func Bool(b bool) string {
	if b {
		return "1"
	}
	return "0"
}
