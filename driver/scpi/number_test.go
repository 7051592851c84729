package scpi

import (
	"errors"
	"math"
	"math/rand/v2"
	"strconv"
	"strings"
	"testing"

	"rolloff/driver"
)

func TestParseNumberForms(t *testing.T) {
	for _, tc := range []struct {
		in   string
		want float64
	}{
		// NR1: implicit point (IEEE 488.2 §8.7.2).
		{"0", 0}, {"+1", 1}, {"-273", -273}, {"1000", 1e3},
		// NR2: explicit point (§8.7.3); NRf also allows a bare point
		// on either side (§7.7.2.2).
		{"1.5", 1.5}, {"-0.001", -1e-3}, {".5", 0.5}, {"5.", 5}, {"+.25", 0.25},
		// NR3: with exponent (§8.7.4), either case of E, signed or not.
		{"1.234E+03", 1234}, {"1.234e3", 1234}, {"-1.5E-07", -1.5e-7}, {"+9.9E36", 9.9e36}, {"1E0", 1},
		// White space around the number and around the exponent mark
		// (NRf, §7.7.2.2) as instruments send it.
		{" +1.0E+00\r\n", 1}, {"\t2.5 ", 2.5}, {"1.0 E+03", 1000}, {"1.0E +3", 1000}, {"1.0 e -3", 1e-3},
		// Not special: close to, but not, the SCPI codes.
		{"9.8E37", 9.8e37}, {"9.92E37", 9.92e37}, {"-9.91E37", -9.91e37},
	} {
		got, err := ParseNumber(tc.in)
		if err != nil || got != tc.want {
			t.Errorf("ParseNumber(%q) = %v, %v; want %v", tc.in, got, err, tc.want)
		}
	}
}

func TestParseNumberSpecialValues(t *testing.T) {
	// SCPI-1999 Vol 1 §7.2.1: +INF is 9.9E37, NINF -9.9E37, NAN 9.91E37,
	// in any NRf spelling.
	for _, tc := range []struct {
		in   string
		want error
	}{
		{"9.9E37", driver.ErrOverload}, {"+9.9E+37", driver.ErrOverload}, {"9.90000E+37", driver.ErrOverload},
		{"99E36", driver.ErrOverload}, {"0.99e38", driver.ErrOverload}, {"99000000000000000000000000000000000000", driver.ErrOverload},
		{" 9.9 E 37 ", driver.ErrOverload}, {"INF", driver.ErrOverload}, {"+inf", driver.ErrOverload},
		{"-9.9E37", driver.ErrNegativeOverload}, {"-9.90000E+37", driver.ErrNegativeOverload}, {"-99e36", driver.ErrNegativeOverload},
		{"NINF", driver.ErrNegativeOverload}, {"-INF", driver.ErrNegativeOverload},
		{"9.91E37", driver.ErrNotANumber}, {"+9.9100E+37", driver.ErrNotANumber}, {"991E35", driver.ErrNotANumber}, {"NaN", driver.ErrNotANumber},
	} {
		v, err := ParseNumber(tc.in)
		if !errors.Is(err, tc.want) {
			t.Errorf("ParseNumber(%q) = %v, %v; want %v", tc.in, v, err, tc.want)
		}
		if errors.Is(err, driver.ErrMalformed) {
			t.Errorf("ParseNumber(%q): a special value is not malformed: %v", tc.in, err)
		}
	}
}

func TestParseNumberMalformed(t *testing.T) {
	for _, in := range []string{
		"", "  ", "+", "-", ".", "+.", "E5", "1.23E", "1.23E+", "1.2.3", "1..2", "++1", "1+", "1E5.0", "1E5 0",
		"0x10", "1_000", "1,000", "12abc", "1.0V", "∞", "1E400", "-1E400", "#H1F", "\"1\"", "1 2",
	} {
		v, err := ParseNumber(in)
		if !errors.Is(err, driver.ErrMalformed) {
			t.Errorf("ParseNumber(%q) = %v, %v; want ErrMalformed", in, v, err)
			continue
		}
		if !strings.Contains(err.Error(), strconv.Quote(in)) {
			t.Errorf("ParseNumber(%q): message %q should quote the response", in, err)
		}
	}
	// A long garbage response is quoted truncated.
	long := strings.Repeat("x", 5000)
	_, err := ParseNumber(long)
	if !errors.Is(err, driver.ErrMalformed) || len(err.Error()) > 200 {
		t.Errorf("ParseNumber(5000 bytes): %d-byte message", len(err.Error()))
	}
}

func TestParseNumbers(t *testing.T) {
	got, err := ParseNumbers("+1.0E-01,+2.0E-01, 3.0E-01 ")
	if err != nil || len(got) != 3 || got[0] != 0.1 || got[1] != 0.2 || got[2] != 0.3 {
		t.Fatalf("ParseNumbers = %v, %v", got, err)
	}
	if _, err := ParseNumbers("1,,2"); !errors.Is(err, driver.ErrMalformed) || !strings.Contains(err.Error(), "element 2 of 3") {
		t.Errorf("empty element: %v", err)
	}
	if _, err := ParseNumbers("1,9.9E37,2"); !errors.Is(err, driver.ErrOverload) || !strings.Contains(err.Error(), "element 2") {
		t.Errorf("overload in a burst: %v", err)
	}
	if _, err := ParseNumbers(""); !errors.Is(err, driver.ErrMalformed) {
		t.Errorf("empty list: %v", err)
	}
}

func TestFormatNumberRoundTrip(t *testing.T) {
	tenth := 0.1 // a variable, so that 0.1+0.2 is rounded at run time
	for _, tc := range []struct {
		v    float64
		want string
	}{
		{1000, "1000"}, {0.001, "0.001"}, {-12.5, "-12.5"}, {0, "0"}, {math.Copysign(0, -1), "0"},
		{1e-4, "0.0001"}, {1e-5, "1E-05"}, {1e15, "1E+15"}, {123456789, "123456789"}, {tenth + 0.2, "0.30000000000000004"},
	} {
		got, err := FormatNumber(tc.v)
		if err != nil || got != tc.want {
			t.Errorf("FormatNumber(%v) = %q, %v; want %q", tc.v, got, err, tc.want)
		}
	}
	rng := rand.New(rand.NewPCG(3, 4))
	for range 5000 {
		v := math.Float64frombits(rng.Uint64())
		s, err := FormatNumber(v)
		if math.IsNaN(v) || math.IsInf(v, 0) || math.Abs(v) >= Overload {
			if err == nil {
				t.Fatalf("FormatNumber(%v) = %q, want an error", v, s)
			}
			continue
		}
		if err != nil {
			t.Fatalf("FormatNumber(%v): %v", v, err)
		}
		back, err := ParseNumber(s)
		if err != nil || back != v {
			t.Fatalf("ParseNumber(FormatNumber(%v) = %q) = %v, %v", v, s, back, err)
		}
	}
	for _, v := range []float64{math.NaN(), math.Inf(1), math.Inf(-1), 9.9e37, -9.91e37} {
		if s, err := FormatNumber(v); err == nil {
			t.Errorf("FormatNumber(%v) = %q, want an error", v, s)
		}
	}
}
