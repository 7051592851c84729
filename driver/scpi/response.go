package scpi

import (
	"fmt"
	"sort"
	"strings"

	"rolloff/driver"
)

// ResponseFormat describes how an instrument departs from the plain
// IEEE 488.2 numeric response: unit suffixes after the number
// ("+1.0E-01 VDC"), words it answers instead of a number on an overload
// ("OVLD"), a separator left after the last reading of a burst, and an
// identity of fewer than four fields. The zero value is strict IEEE 488.2.
type ResponseFormat struct {
	// Suffixes are unit words stripped from the end of each numeric
	// element, matched without regard to case (the longest first).
	Suffixes []string
	// OverloadWords are answers that mean an overload: they wrap
	// driver.ErrOverload, like 9.9E37.
	OverloadWords []string
	// TrailingSeparator accepts one ',' after the last element.
	TrailingSeparator bool
	// LenientIdentity accepts a *IDN? answer of two to four fields
	// (manufacturer and model at least); the missing ones are empty.
	LenientIdentity bool
}

// ParseNumber parses one numeric response element in format f.
func (f ResponseFormat) ParseNumber(s string) (float64, error) {
	t := strings.TrimSpace(s)
	for _, w := range f.OverloadWords {
		if strings.EqualFold(t, w) {
			return 0, numberError(s, fmt.Sprintf("overload word %q", w), driver.ErrOverload)
		}
	}
	if len(f.Suffixes) > 0 {
		suf := append([]string(nil), f.Suffixes...)
		sort.Slice(suf, func(i, j int) bool { return len(suf[i]) > len(suf[j]) })
		for _, w := range suf {
			if len(t) > len(w) && strings.EqualFold(t[len(t)-len(w):], w) {
				t = strings.TrimSpace(t[:len(t)-len(w)])
				break
			}
		}
	}
	return ParseNumber(t)
}

// ParseNumbers parses a comma-separated list of numeric responses in
// format f; any element that is not a finite number fails the list,
// naming the element.
func (f ResponseFormat) ParseNumbers(s string) ([]float64, error) {
	t := strings.TrimSpace(s)
	if f.TrailingSeparator {
		t = strings.TrimSpace(strings.TrimSuffix(t, ","))
	}
	if t == "" {
		return nil, numberError(s, "empty list", driver.ErrMalformed)
	}
	fields := strings.Split(t, ",")
	out := make([]float64, len(fields))
	for i, e := range fields {
		v, err := f.ParseNumber(e)
		if err != nil {
			return nil, fmt.Errorf("element %d of %d: %w", i+1, len(fields), err)
		}
		out[i] = v
	}
	return out, nil
}

// ParseIdentity parses a *IDN? answer in format f.
func (f ResponseFormat) ParseIdentity(s string) (driver.Identity, error) {
	if !f.LenientIdentity {
		return ParseIdentity(s)
	}
	n := len(strings.Split(strings.TrimSpace(s), ","))
	if n < 2 || n > 4 {
		return driver.Identity{}, fmt.Errorf("scpi: *IDN? answer %q: %d field(s) (want 2 to 4: manufacturer,model[,serial[,firmware]]): %w", quoteable(s), n, driver.ErrMalformed)
	}
	return ParseIdentity(strings.TrimSpace(s) + strings.Repeat(",", 4-n))
}
