package scpi

import (
	"errors"
	"fmt"
	"strconv"
	"strings"

	"rolloff/driver"
)

// Error is an entry of an instrument's error/event queue, as read with
// SYSTem:ERRor? (SCPI-1999 Vol 2 §21.8): a number and its description.
// It matches driver.ErrInstrument with errors.Is.
type Error struct {
	Code    int
	Message string
}

// Error returns the entry as the instrument reported it.
func (e Error) Error() string {
	if e.Message == "" {
		return fmt.Sprintf("instrument error %d (%s)", e.Code, e.Class())
	}
	return fmt.Sprintf("instrument error %d: %s (%s)", e.Code, e.Message, e.Class())
}

// Is reports whether target is driver.ErrInstrument.
func (e Error) Is(target error) bool { return target == driver.ErrInstrument }

// Class names the class of the error number (SCPI-1999 Vol 2 §21.8,
// matching the IEEE 488.2 §11.5.1 event status bits; ranges from memory).
func (e Error) Class() string {
	switch c := e.Code; {
	case c == 0:
		return "no error"
	case c > 0:
		return "device-dependent error"
	case c <= -100 && c >= -199:
		return "command error"
	case c <= -200 && c >= -299:
		return "execution error"
	case c <= -300 && c >= -399:
		return "device-specific error"
	case c <= -400 && c >= -499:
		return "query error"
	case c <= -500 && c >= -599:
		return "power-on event"
	case c <= -600 && c >= -699:
		return "user request event"
	case c <= -700 && c >= -799:
		return "request control event"
	case c <= -800 && c >= -899:
		return "operation complete event"
	}
	return "reserved error number"
}

// Limits of an error/event number (SCPI-1999 Vol 2 §21.8.1, a 16-bit
// signed integer; from memory).
const (
	minErrorCode = -32768
	maxErrorCode = 32767
)

// ParseErrorEntry parses one SYSTem:ERRor? answer: <number>,"<description>"
// (e.g. -113,"Undefined header"), the description being IEEE 488.2 string
// response data (§8.7.8) with "" for a quote inside. White space around
// either field is tolerated, as is a description without quotes or a bare
// number. Anything else wraps driver.ErrMalformed.
func ParseErrorEntry(s string) (Error, error) {
	bad := func(reason string) (Error, error) {
		return Error{}, fmt.Errorf("scpi: SYST:ERR? answer %q: %s: %w", quoteable(s), reason, driver.ErrMalformed)
	}
	t := strings.TrimSpace(s)
	codeText, text, hasText := strings.Cut(t, ",")
	codeText = strings.TrimSpace(codeText)
	if codeText == "" {
		return bad("no error number")
	}
	digits := strings.TrimLeft(codeText, "+-")
	if len(codeText)-len(digits) > 1 || digits == "" || strings.TrimLeft(digits, "0123456789") != "" {
		return bad("the error number is not an integer (NR1)")
	}
	code, err := strconv.Atoi(codeText)
	if err != nil || code < minErrorCode || code > maxErrorCode {
		return bad(fmt.Sprintf("error number outside %d..%d", minErrorCode, maxErrorCode))
	}
	if !hasText {
		return Error{Code: code}, nil
	}
	text = strings.TrimSpace(text)
	if !strings.HasPrefix(text, `"`) {
		if strings.Contains(text, `"`) {
			return bad("a quote inside an unquoted description")
		}
		return Error{Code: code, Message: text}, nil
	}
	msg, err := unquoteString(text)
	if err != nil {
		return bad(err.Error())
	}
	return Error{Code: code, Message: msg}, nil
}

// unquoteString reads IEEE 488.2 string response data (§8.7.8): text in
// double quotes, a doubled quote standing for one.
func unquoteString(t string) (string, error) {
	var b strings.Builder
	for i := 1; i < len(t); i++ {
		if t[i] != '"' {
			b.WriteByte(t[i])
			continue
		}
		if i+1 < len(t) && t[i+1] == '"' {
			b.WriteByte('"')
			i++
			continue
		}
		if i != len(t)-1 {
			return "", errors.New("text after the closing quote")
		}
		return b.String(), nil
	}
	return "", errors.New("no closing quote")
}

// QuoteString writes s as IEEE 488.2 string data (§8.7.8), doubling quotes.
func QuoteString(s string) string {
	return `"` + strings.ReplaceAll(s, `"`, `""`) + `"`
}

// ParseIdentity parses a *IDN? answer into its four fields: manufacturer,
// model, serial number, firmware level (IEEE 488.2 §10.14 and §4.1.3.6).
// White space around the answer and each field is tolerated; a field count
// other than four, or an empty manufacturer or model, wraps
// driver.ErrMalformed.
func ParseIdentity(s string) (driver.Identity, error) {
	bad := func(reason string) (driver.Identity, error) {
		return driver.Identity{}, fmt.Errorf("scpi: *IDN? answer %q: %s (want manufacturer,model,serial,firmware; IEEE 488.2 §10.14): %w", quoteable(s), reason, driver.ErrMalformed)
	}
	f := strings.Split(strings.TrimSpace(s), ",")
	if len(f) != 4 {
		return bad(fmt.Sprintf("%d field(s)", len(f)))
	}
	for i := range f {
		f[i] = strings.TrimSpace(f[i])
		for _, c := range []byte(f[i]) {
			if c < 0x20 || c > 0x7e {
				return bad(fmt.Sprintf("field %d has a byte 0x%02x outside printable ASCII", i+1, c))
			}
		}
	}
	if f[0] == "" {
		return bad("empty manufacturer")
	}
	if f[1] == "" {
		return bad("empty model")
	}
	return driver.Identity{Manufacturer: f[0], Model: f[1], Serial: f[2], Firmware: f[3]}, nil
}
