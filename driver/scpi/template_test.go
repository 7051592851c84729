package scpi

import (
	"errors"
	"math"
	"strings"
	"testing"

	"rolloff/driver"
)

func TestCompileAndFormat(t *testing.T) {
	tp, err := Compile("generator.set_frequency", "SOUR:FREQ {freq_hz}")
	if err != nil {
		t.Fatal(err)
	}
	if tp.Key() != "generator.set_frequency" || strings.Join(tp.Placeholders(), ",") != "freq_hz" {
		t.Fatalf("Key %q, Placeholders %q", tp.Key(), tp.Placeholders())
	}
	got, err := tp.Format(Num("freq_hz", 1000))
	if err != nil || got != "SOUR:FREQ 1000" {
		t.Fatalf("Format = %q, %v", got, err)
	}
	got, _ = tp.Format(Num("freq_hz", 12345.678901234))
	if v, err := ParseNumber(strings.TrimPrefix(got, "SOUR:FREQ ")); err != nil || v != 12345.678901234 {
		t.Fatalf("number does not read back exactly: %q", got)
	}

	multi, err := Compile("voltmeter.configure", "CONF:VOLT:DC {range_v},{res};:SENS:ZERO:AUTO {zero}")
	if err == nil {
		t.Fatalf("a ';' in a template was accepted: %v", multi)
	}
	tp, err = Compile("voltmeter.configure", "CONF:VOLT:DC {range_v},DEF")
	if err != nil {
		t.Fatal(err)
	}
	if got, err := tp.Format(Num("range_v", 10)); err != nil || got != "CONF:VOLT:DC 10,DEF" {
		t.Fatalf("Format = %q, %v", got, err)
	}
	tp, _ = Compile("switch.close", "ROUT:CLOS (@{ch}),(@{ch})")
	if got, err := tp.Format(Int("ch", 101)); err != nil || got != "ROUT:CLOS (@101),(@101)" || len(tp.Placeholders()) != 1 {
		t.Fatalf("a repeated placeholder: %q, %v, %q", got, err, tp.Placeholders())
	}
	tp, _ = Compile("generator.output", "OUTP {state}")
	for _, w := range []string{"ON", "OFF", "1", "0", "MAXimum", "SIN", "VOLT_RMS", "-3.5", "1E3", "+2"} {
		if got, err := tp.Format(Word("state", w)); err != nil || got != "OUTP "+w {
			t.Errorf("Word(%q): %q, %v", w, got, err)
		}
	}
	tp, _ = Compile("common.reset", "*RST")
	if got, err := tp.Format(); err != nil || got != "*RST" || len(tp.Placeholders()) != 0 {
		t.Errorf("no placeholders: %q, %v", got, err)
	}
}

func TestCompileRefusesUnsafeText(t *testing.T) {
	for _, tc := range []struct{ text, reason string }{
		{"SOUR:FREQ {f}\n", "line break"},
		{"SOUR:FREQ {f}\r", "line break"},
		{"*RST;*CLS", "';'"},
		{`DISP:TEXT "hi"`, "quotes"},
		{"DISP:TEXT 'hi'", "quotes"},
		{"SOUR:FREQ {f", "'{' without '}'"},
		{"SOUR:FREQ f}", "'}' without '{'"},
		{"SOUR:FREQ {{f}}", "'{' without '}'"},
		{"SOUR:FREQ {}", "placeholder {}"},
		{"SOUR:FREQ {f:%.3f}", "placeholder {f:%.3f}"},
		{"SOUR:FREQ {freq hz}", "placeholder {freq hz}"},
		{"SOUR:FREQ {9f}", "placeholder {9f}"},
		{"SOUR:FREQ\t{f}", "not printable"},
		{"SOUR:FREQ {f}\x00", "not printable"},
		{"SOUR:FRÉQ {f}", "not printable"},
		{"", "empty"},
		{"   ", "empty"},
	} {
		_, err := Compile("generator.set_frequency", tc.text)
		var te *TemplateError
		if !errors.As(err, &te) || te.Key != "generator.set_frequency" {
			t.Errorf("Compile(%q) = %v, want a TemplateError naming the key", tc.text, err)
			continue
		}
		if msg := err.Error(); !strings.Contains(msg, `"generator.set_frequency"`) || !strings.Contains(msg, tc.reason) {
			t.Errorf("Compile(%q): %q should name the key and say %q", tc.text, msg, tc.reason)
		}
	}
}

func TestFormatRefusesInjection(t *testing.T) {
	tp, err := Compile("generator.set_function", "SOUR:FUNC {shape}")
	if err != nil {
		t.Fatal(err)
	}
	for _, v := range []string{"1;*RST", `SIN"`, "SIN'", "SIN\n*RST", "SIN\r", "ON OFF", "SIN,SQU", "", "SIN\t", "(@1)", "ÉTÉ", "A2345678901234", "1.2.3", "#H1F", "-"} {
		got, err := tp.Format(Word("shape", v))
		var te *TemplateError
		if !errors.As(err, &te) {
			t.Errorf("Word(%q) accepted: %q", v, got)
			continue
		}
		if te.Key != "generator.set_function" || te.Placeholder != "shape" || !errors.Is(err, driver.ErrOutOfRange) {
			t.Errorf("Word(%q): %+v should name the key and placeholder and wrap ErrOutOfRange", v, te)
		}
		if msg := err.Error(); !strings.Contains(msg, "generator.set_function") || !strings.Contains(msg, "{shape}") {
			t.Errorf("Word(%q): message %q should name the key and placeholder", v, msg)
		}
	}
	num, _ := Compile("generator.set_amplitude", "SOUR:VOLT {vrms} VRMS")
	for _, v := range []float64{math.NaN(), math.Inf(1), math.Inf(-1), 9.9e37} {
		if got, err := num.Format(Num("vrms", v)); !errors.Is(err, driver.ErrOutOfRange) || !strings.Contains(err.Error(), "{vrms}") {
			t.Errorf("Num(%v) = %q, %v; want a refusal naming {vrms}", v, got, err)
		}
	}
}

func TestFormatArgumentBookkeeping(t *testing.T) {
	tp, _ := Compile("voltmeter.configure", "CONF:VOLT:DC {range_v},{res_v}")
	for _, tc := range []struct {
		args []Arg
		want string
	}{
		{[]Arg{Num("range_v", 10)}, "{res_v}: no argument given"},
		{[]Arg{Num("range_v", 10), Num("res_v", 1e-6), Num("nplc", 10)}, "{nplc}"},
		{[]Arg{Num("range_v", 10), Num("range_v", 1), Num("res_v", 1e-6)}, "more than once"},
		{nil, "no argument given"},
	} {
		got, err := tp.Format(tc.args...)
		if err == nil || !strings.Contains(err.Error(), tc.want) || !strings.Contains(err.Error(), "voltmeter.configure") {
			t.Errorf("Format(%v) = %q, %v; want an error with %q and the key", tc.args, got, err, tc.want)
		}
	}
	if got, err := tp.Format(Num("res_v", 1e-6), Num("range_v", 10)); err != nil || got != "CONF:VOLT:DC 10,1E-06" {
		t.Errorf("Format in any order = %q, %v", got, err)
	}
}
