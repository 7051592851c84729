package scpi

import (
	"errors"
	"strings"
	"testing"

	"rolloff/driver"
)

func TestParseErrorEntry(t *testing.T) {
	for _, tc := range []struct {
		in    string
		code  int
		msg   string
		class string
	}{
		// SCPI-1999 Vol 2 §21.8: <number>,"<description>"; -113 is
		// "Undefined header", a command error (-100..-199).
		{`-113,"Undefined header"`, -113, "Undefined header", "command error"},
		{`0,"No error"`, 0, "No error", "no error"},
		{`+0,"No error"`, 0, "No error", "no error"},
		// Device-dependent information follows a ';' inside the string.
		{` -222 , "Data out of range;FREQ 2E7" `, -222, "Data out of range;FREQ 2E7", "execution error"},
		{`-350,"Queue overflow"`, -350, "Queue overflow", "device-specific error"},
		{`-410,"Query INTERRUPTED"` + "\n", -410, "Query INTERRUPTED", "query error"},
		{`-500,"Power on"`, -500, "Power on", "power-on event"},
		// IEEE 488.2 §8.7.8: a doubled quote is one quote.
		{`-101,"Invalid character ""#"""`, -101, `Invalid character "#"`, "command error"},
		{`201,"Relay card missing"`, 201, "Relay card missing", "device-dependent error"},
		// Tolerated: no quotes, or a bare number.
		{`-113,Undefined header`, -113, "Undefined header", "command error"},
		{`0`, 0, "", "no error"},
	} {
		e, err := ParseErrorEntry(tc.in)
		if err != nil || e.Code != tc.code || e.Message != tc.msg {
			t.Errorf("ParseErrorEntry(%q) = %+v, %v; want %d %q", tc.in, e, err, tc.code, tc.msg)
			continue
		}
		if e.Class() != tc.class {
			t.Errorf("Error{%d}.Class() = %q, want %q", e.Code, e.Class(), tc.class)
		}
		if !errors.Is(e, driver.ErrInstrument) {
			t.Errorf("errors.Is(%v, ErrInstrument) = false", e)
		}
		if tc.msg != "" && !strings.Contains(e.Error(), tc.msg) {
			t.Errorf("Error() = %q, want it to carry %q", e.Error(), tc.msg)
		}
	}
	for _, in := range []string{
		``, `,"x"`, `abc,"x"`, `1.5,"x"`, `--1,"x"`, `+-1,"x"`, `99999,"x"`, `-32769,"x"`,
		`-113,"Undefined header`, `-113,"a"b`, `-113,a"b`,
	} {
		if e, err := ParseErrorEntry(in); !errors.Is(err, driver.ErrMalformed) {
			t.Errorf("ParseErrorEntry(%q) = %+v, %v; want ErrMalformed", in, e, err)
		}
	}
}

func TestErrorMatchesThroughWrapping(t *testing.T) {
	var err error = Error{Code: -113, Message: "Undefined header"}
	wrapped := errors.Join(errors.New("generator"), err)
	if !errors.Is(wrapped, driver.ErrInstrument) {
		t.Fatal("a wrapped Error does not match ErrInstrument")
	}
	var e Error
	if !errors.As(wrapped, &e) || e.Code != -113 {
		t.Fatalf("errors.As gave %+v", e)
	}
	if errors.Is(err, driver.ErrMalformed) {
		t.Fatal("an instrument error matches ErrMalformed")
	}
}

func TestParseIdentity(t *testing.T) {
	// IEEE 488.2 §10.14: manufacturer, model, serial number, firmware.
	id, err := ParseIdentity("rolloff,SIM-GEN,0001,1.0\n")
	if err != nil || id != (driver.Identity{Manufacturer: "rolloff", Model: "SIM-GEN", Serial: "0001", Firmware: "1.0"}) {
		t.Fatalf("ParseIdentity = %+v, %v", id, err)
	}
	if id.String() != "rolloff,SIM-GEN,0001,1.0" {
		t.Errorf("String() = %q", id.String())
	}
	// §4.1.3.6: 0 where a serial or firmware level is not reported.
	id, err = ParseIdentity("  rolloff , SIM-DMM , 0 , 0  ")
	if err != nil || id.Model != "SIM-DMM" || id.Serial != "0" || id.Firmware != "0" {
		t.Fatalf("ParseIdentity with spaces = %+v, %v", id, err)
	}
	for _, in := range []string{"", "rolloff,SIM-GEN,0001", "rolloff,SIM-GEN,0001,1.0,extra", ",SIM-GEN,1,1", "rolloff,,1,1", "rolloff,SIM\x01,1,1", "+1.0E+03"} {
		if id, err := ParseIdentity(in); !errors.Is(err, driver.ErrMalformed) || !strings.Contains(err.Error(), "IDN") {
			t.Errorf("ParseIdentity(%q) = %+v, %v; want ErrMalformed", in, id, err)
		}
	}
}

func TestQuoteString(t *testing.T) {
	for _, s := range []string{"", "plain", `a "quoted" word`, `""`} {
		q := QuoteString(s)
		back, err := unquoteString(q)
		if err != nil || back != s {
			t.Errorf("unquoteString(QuoteString(%q) = %s) = %q, %v", s, q, back, err)
		}
	}
}
