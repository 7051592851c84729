package scpiserver

import (
	"math"
	"strings"
)

// Arity checks the number of program data elements: -109 "Missing
// parameter" below min, -108 "Parameter not allowed" above max.
func (c *Call) Arity(min, max int) error {
	if len(c.Args) < min {
		return Errorf(MissingParameter, "%s", clip(c.Header))
	}
	if len(c.Args) > max {
		return Errorf(ParameterNotAllowed, "%s", clip(c.Header))
	}
	return nil
}

// NumSpec describes a numeric parameter.
type NumSpec struct {
	// Unit is the base unit accepted as a suffix, upper case ("HZ", "V",
	// "S", "OHM"), with any IEEE 488.2 §7.7.3 multiplier; "" accepts no
	// suffix.
	Unit string
	// AltUnits are other accepted units ("VPP", "DBM"); Num.Unit reports
	// which one was used.
	AltUnits []string
	// Specials maps character data accepted in place of a number, written
	// as patterns ("MINimum", "MAXimum", "DEFault", "INFinity"), to their
	// values.
	Specials map[string]float64
}

// Num is a decoded numeric parameter.
type Num struct {
	V       float64 // in the unit reported by Unit, multiplier applied
	Unit    string  // the unit of the suffix, "" when none was given
	Special string  // the Specials pattern matched, "" for a number
}

// multipliers are IEEE 488.2 §7.7.3.2 Table 7-1.
var multipliers = []struct {
	m string
	v float64
}{
	{"EX", 1e18}, {"PE", 1e15}, {"MA", 1e6}, {"T", 1e12}, {"G", 1e9},
	{"K", 1e3}, {"M", 1e-3}, {"U", 1e-6}, {"N", 1e-9}, {"P", 1e-12},
	{"F", 1e-15}, {"A", 1e-18},
}

// scaleSuffix returns the factor a suffix applies for unit, and whether
// the suffix is that unit with or without a multiplier.
func scaleSuffix(suffix, unit string) (float64, bool) {
	if unit == "" {
		return 0, false
	}
	if suffix == unit {
		return 1, true
	}
	// SCPI-1999 Vol 1 §7.3.3: MHZ and MOHM are megahertz and megohm.
	if (unit == "HZ" && suffix == "MHZ") || (unit == "OHM" && suffix == "MOHM") {
		return 1e6, true
	}
	for _, m := range multipliers {
		if suffix == m.m+unit {
			return m.v, true
		}
	}
	return 0, false
}

// Number decodes parameter i as decimal numeric data or one of the
// special character data of spec. It answers -104 "Data type error" for
// a string, channel list or unknown character data, -131 "Invalid
// suffix" for a suffix of the wrong unit and -138 "Suffix not allowed"
// where none is accepted.
func (c *Call) Number(i int, spec NumSpec) (Num, error) {
	if i >= len(c.Args) {
		return Num{}, Errorf(MissingParameter, "%s", clip(c.Header))
	}
	a := c.Args[i]
	switch a.Kind {
	case ArgChar:
		for pat, v := range spec.Specials {
			if charMatches(pat, a.Str) {
				return Num{V: v, Special: pat}, nil
			}
		}
		return Num{}, Errorf(DataTypeError, "%s", clip(a.Text))
	case ArgNumber:
	default:
		return Num{}, Errorf(DataTypeError, "%s", clip(a.Text))
	}
	if a.Suffix == "" {
		return Num{V: a.Num}, nil
	}
	if spec.Unit == "" && len(spec.AltUnits) == 0 {
		return Num{}, Errorf(SuffixNotAllowed, "%s", clip(a.Text))
	}
	if f, ok := scaleSuffix(a.Suffix, spec.Unit); ok {
		return Num{V: a.Num * f, Unit: spec.Unit}, nil
	}
	for _, u := range spec.AltUnits {
		if f, ok := scaleSuffix(a.Suffix, u); ok {
			return Num{V: a.Num * f, Unit: u}, nil
		}
	}
	return Num{}, Errorf(InvalidSuffix, "%s", clip(a.Text))
}

// Float decodes parameter i as a number in unit with the specials given.
func (c *Call) Float(i int, unit string, specials map[string]float64) (float64, error) {
	n, err := c.Number(i, NumSpec{Unit: unit, Specials: specials})
	return n.V, err
}

// Int decodes parameter i as an integer in [lo, hi], rounding NRf
// (SCPI-1999 §7.2.1.3); out of range answers -222.
func (c *Call) Int(i, lo, hi int) (int, error) {
	n, err := c.Number(i, NumSpec{Specials: map[string]float64{"MINimum": float64(lo), "MAXimum": float64(hi)}})
	if err != nil {
		return 0, err
	}
	v := math.Round(n.V)
	if v < float64(lo) || v > float64(hi) {
		return 0, Errorf(DataOutOfRange, "%s not in %d..%d", clip(c.Args[i].Text), lo, hi)
	}
	return int(v), nil
}

// Bool decodes parameter i as boolean data: ON, OFF or a number, zero
// being OFF and any value that rounds to non-zero ON (SCPI-1999 §7.3).
func (c *Call) Bool(i int) (bool, error) {
	if i >= len(c.Args) {
		return false, Errorf(MissingParameter, "%s", clip(c.Header))
	}
	a := c.Args[i]
	switch a.Kind {
	case ArgChar:
		switch a.Str {
		case "ON":
			return true, nil
		case "OFF":
			return false, nil
		}
		return false, Errorf(IllegalParameter, "%s", clip(a.Text))
	case ArgNumber:
		if a.Suffix != "" {
			return false, Errorf(SuffixNotAllowed, "%s", clip(a.Text))
		}
		return math.Round(a.Num) != 0, nil
	}
	return false, Errorf(DataTypeError, "%s", clip(a.Text))
}

// Choice decodes parameter i as character data matching one of the
// patterns ("SINusoid", "SQUare") and returns its index; anything else
// answers -224 "Illegal parameter value" (-104 for a non-character type).
func (c *Call) Choice(i int, patterns ...string) (int, error) {
	if i >= len(c.Args) {
		return 0, Errorf(MissingParameter, "%s", clip(c.Header))
	}
	a := c.Args[i]
	if a.Kind != ArgChar {
		return 0, Errorf(DataTypeError, "%s", clip(a.Text))
	}
	for k, p := range patterns {
		if charMatches(p, a.Str) {
			return k, nil
		}
	}
	return 0, Errorf(IllegalParameter, "%s", clip(a.Text))
}

// Channels decodes parameter i as a channel list.
func (c *Call) Channels(i int) ([]int, error) {
	if i >= len(c.Args) {
		return nil, Errorf(MissingParameter, "%s", clip(c.Header))
	}
	a := c.Args[i]
	if a.Kind != ArgChannels {
		return nil, Errorf(DataTypeError, "%s", clip(a.Text))
	}
	return a.Channels, nil
}

// IsChar reports whether parameter i is character data matching pattern.
func (c *Call) IsChar(i int, pattern string) bool {
	return i < len(c.Args) && c.Args[i].Kind == ArgChar && charMatches(pattern, c.Args[i].Str)
}

// charMatches compares upper-case character data with a pattern's short
// and long forms.
func charMatches(pattern, word string) bool {
	var short strings.Builder
	for k := 0; k < len(pattern); k++ {
		if pattern[k] >= 'A' && pattern[k] <= 'Z' || pattern[k] >= '0' && pattern[k] <= '9' {
			short.WriteByte(pattern[k])
		}
	}
	return word == strings.ToUpper(pattern) || word == short.String()
}
