package scpi

import (
	"errors"
	"math"
	"strconv"
	"strings"
	"testing"

	"rolloff/driver"
)

// FuzzParseNumber checks that no response makes the number parser panic,
// that a nil error always means a finite number which is not one of the
// SCPI special codes, that every error wraps one of the four sentinels, and
// that a parsed number written back with FormatNumber reads back the same.
// Seed corpus: testdata/fuzz/FuzzParseNumber (NR1/NR2/NR3 and the
// SCPI-1999 special values).
func FuzzParseNumber(f *testing.F) {
	for _, s := range []string{"+1.0E+03", "-0.5", "9.9E37", "1.23E", "", "+"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		v, err := ParseNumber(s)
		if err != nil {
			if !errors.Is(err, driver.ErrMalformed) && !errors.Is(err, driver.ErrOverload) &&
				!errors.Is(err, driver.ErrNegativeOverload) && !errors.Is(err, driver.ErrNotANumber) {
				t.Fatalf("ParseNumber(%q): %v wraps no sentinel", s, err)
			}
			if len(err.Error()) > 300 {
				t.Fatalf("ParseNumber(%q): %d-byte message", s, len(err.Error()))
			}
			return
		}
		if math.IsNaN(v) || math.IsInf(v, 0) || v == Overload || v == NegativeOverload || v == NotANumber {
			t.Fatalf("ParseNumber(%q) = %v with a nil error", s, v)
		}
		out, err := FormatNumber(v)
		if math.Abs(v) >= Overload {
			// Finite, but program data that large would read as SCPI
			// infinity, so FormatNumber refuses it.
			if err == nil {
				t.Fatalf("FormatNumber(%v) = %q, want a refusal", v, out)
			}
			return
		}
		if err != nil {
			t.Fatalf("FormatNumber(%v) (from %q): %v", v, s, err)
		}
		back, err := ParseNumber(out)
		if err != nil || back != v {
			t.Fatalf("round trip %q -> %v -> %q -> %v, %v", s, v, out, back, err)
		}
	})
}

// FuzzParseErrorEntry checks that an error-queue answer never panics the
// parser and that an entry parsed from it, written back in the SCPI form
// <number>,"<text>", parses to the same entry.
func FuzzParseErrorEntry(f *testing.F) {
	for _, s := range []string{`-113,"Undefined header"`, `0,"No error"`, `-101,"a ""b"""`, `-222,"x`, `1,2,3`} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		e, err := ParseErrorEntry(s)
		if err != nil {
			if !errors.Is(err, driver.ErrMalformed) {
				t.Fatalf("ParseErrorEntry(%q): %v is not ErrMalformed", s, err)
			}
			return
		}
		if e.Code < minErrorCode || e.Code > maxErrorCode {
			t.Fatalf("ParseErrorEntry(%q): code %d out of range", s, e.Code)
		}
		text := QuoteString(e.Message)
		again, err := ParseErrorEntry(strings.TrimSpace(strings.Join([]string{strconv.Itoa(e.Code), text}, ",")))
		if err != nil || again != e {
			// White space at the ends of an unquoted message is not kept.
			if err == nil && strings.TrimSpace(again.Message) == strings.TrimSpace(e.Message) {
				return
			}
			t.Fatalf("round trip %q -> %+v -> %+v, %v", s, e, again, err)
		}
	})
}

// FuzzParseIdentity checks that a *IDN? answer never panics the parser and
// that a parsed identity prints back as an answer with the same fields.
func FuzzParseIdentity(f *testing.F) {
	for _, s := range []string{"rolloff,SIM-GEN,0001,1.0", " a , b , c , d ", "a,b,c", ",,,"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		id, err := ParseIdentity(s)
		if err != nil {
			if !errors.Is(err, driver.ErrMalformed) {
				t.Fatalf("ParseIdentity(%q): %v is not ErrMalformed", s, err)
			}
			return
		}
		again, err := ParseIdentity(id.String())
		if err != nil || again != id {
			t.Fatalf("round trip %q -> %+v -> %+v, %v", s, id, again, err)
		}
	})
}

// FuzzTemplateWord checks that whatever a Word argument holds, a formatted
// command never carries a second command, a quote or a terminator.
func FuzzTemplateWord(f *testing.F) {
	for _, s := range []string{"ON", "1;*RST", "SIN\n", `"x"`, "ON OFF", "-3.5"} {
		f.Add(s)
	}
	tp, err := Compile("generator.output", "OUTP {state}")
	if err != nil {
		f.Fatal(err)
	}
	f.Fuzz(func(t *testing.T, w string) {
		out, err := tp.Format(Word("state", w))
		if err != nil {
			if !errors.Is(err, driver.ErrOutOfRange) {
				t.Fatalf("Word(%q): %v does not wrap ErrOutOfRange", w, err)
			}
			return
		}
		if strings.ContainsAny(out, ";\"'\r\n,\t") || strings.Count(out, " ") != 1 || CheckCommand(out) != nil {
			t.Fatalf("Word(%q) gave the command %q", w, out)
		}
	})
}
