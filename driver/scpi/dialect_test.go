package scpi

import (
	"errors"
	"math"
	"testing"

	"rolloff/driver"
)

func TestResponseFormat(t *testing.T) {
	f := ResponseFormat{Suffixes: []string{"V", "VDC"}, OverloadWords: []string{"OVLD"}, TrailingSeparator: true, LenientIdentity: true}
	if v, err := f.ParseNumber("+1.0E-01 VDC"); err != nil || v != 0.1 {
		t.Errorf("suffixed = %v, %v", v, err)
	}
	if v, err := f.ParseNumber("-2.5E+00V"); err != nil || v != -2.5 {
		t.Errorf("suffix without space = %v, %v", v, err)
	}
	if _, err := f.ParseNumber(" ovld "); !errors.Is(err, driver.ErrOverload) {
		t.Errorf("overload word = %v, want ErrOverload", err)
	}
	if _, err := f.ParseNumber("1.0 MV"); !errors.Is(err, driver.ErrMalformed) {
		t.Errorf("unknown suffix = %v, want ErrMalformed", err)
	}
	vs, err := f.ParseNumbers("1E-1 VDC,2E-1 VDC,")
	if err != nil || len(vs) != 2 || vs[1] != 0.2 {
		t.Errorf("burst with trailing comma = %v, %v", vs, err)
	}
	if _, err := (ResponseFormat{}).ParseNumbers("1,2,"); !errors.Is(err, driver.ErrMalformed) {
		t.Errorf("strict trailing comma = %v, want ErrMalformed", err)
	}
	id, err := f.ParseIdentity("maker,model,7")
	if err != nil || id.Model != "model" || id.Serial != "7" || id.Firmware != "" {
		t.Errorf("3-field identity = %+v, %v", id, err)
	}
	if _, err := (ResponseFormat{}).ParseIdentity("maker,model,7"); err == nil {
		t.Error("strict 3-field identity accepted (IEEE 488.2 §10.14 wants 4)")
	}
}

func TestNumberFormat(t *testing.T) {
	for _, c := range []struct {
		f    NumberFormat
		v    float64
		want string
	}{
		{NumberFormat{}, 0.07924465962305567, "0.0792447"},
		{NumberFormat{}, 1000, "1000"},
		{NumberFormat{Digits: 4}, 1234567, "1235000"},
		{NumberFormat{NR3: true}, 0.28284271247461906, "2.82843E-01"},
		{NumberFormat{Digits: 3, NR3: true}, 95000, "9.50E+04"},
	} {
		got, err := c.f.Text(c.v)
		if err != nil || got != c.want {
			t.Errorf("%v.Text(%v) = %q, %v; want %q", c.f, c.v, got, err, c.want)
		}
		// The recorded value is what the instrument reads back.
		back, err := ParseNumber(got)
		if err != nil || back != c.f.Round(c.v) {
			t.Errorf("%q reads back %v, Round gives %v", got, back, c.f.Round(c.v))
		}
	}
}

func TestSeqFormat(t *testing.T) {
	s, err := CompileSeq("reading", "INITiate", "FETCh?")
	if err != nil {
		t.Fatal(err)
	}
	cmds, err := s.Format()
	if err != nil || len(cmds) != 2 || cmds[1] != "FETCh?" {
		t.Fatalf("Format = %v, %v", cmds, err)
	}
	a, err := CompileSeq("apply", "FREQ {freq_hz}", "VOLT {amplitude}")
	if err != nil {
		t.Fatal(err)
	}
	cmds, err = a.Format(Num("freq_hz", 10), Num("amplitude", 0.5))
	if err != nil || cmds[0] != "FREQ 10" || cmds[1] != "VOLT 0.5" {
		t.Fatalf("Format = %v, %v", cmds, err)
	}
	if _, err := a.Format(Num("freq_hz", 10)); err == nil {
		t.Error("missing {amplitude} accepted")
	}
	if _, err := a.Format(Num("freq_hz", 10), Num("amplitude", 1), Num("offset_v", 0)); err == nil {
		t.Error("unused {offset_v} accepted")
	}
}

// TestNumberFormatDirected: rounding an amplitude never goes above the
// value asked for, so a level at a limit stays within it.
func TestNumberFormatDirected(t *testing.T) {
	f := NumberFormat{}
	for _, v := range []float64{0.9999995, 1.0000004, -10.0000004, 13.01029995663981, 0.28284271247461906, 1, 123456.7} {
		fl, ce := f.Floor(v), f.Ceil(v)
		if fl > v || ce < v || f.Round(fl) != fl || f.Round(ce) != ce {
			t.Errorf("%v: floor %v, ceil %v", v, fl, ce)
		}
		if (ce-fl)/math.Abs(v) > 1.01e-5 {
			t.Errorf("%v: floor %v and ceil %v more than a 6th-digit step apart", v, fl, ce)
		}
		if z := f.TowardZero(v); math.Abs(z) > math.Abs(v) {
			t.Errorf("%v: toward zero %v", v, z)
		}
	}
}
