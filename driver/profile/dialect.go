package profile

import (
	"fmt"
	"strings"
	"time"

	"github.com/pelletier/go-toml/v2"

	"rolloff/driver/scpi"
)

// Cmds is a command key's value: one command ("READ?") or a list of
// commands sent in order (["INITiate", "FETCh?"]). Each command is
// still one SCPI command: no ';', quotes or terminators.
type Cmds []string

// badCmds marks a value that is neither a string nor a list of strings:
// the decoder cannot name the key, so the validation, which can, reports
// it (a NUL byte is never in a command a file can hold).
const badCmds = "\x00"

// UnmarshalTOML reads a string or an array of strings. Anything else is
// kept as a marked reason for the validation to report under its key.
func (c *Cmds) UnmarshalTOML(data []byte) error {
	err := c.decode(data)
	if err != nil {
		*c = Cmds{badCmds + err.Error()}
	}
	return nil
}

// badReason returns why the value is not a command list, if it is not.
func (c Cmds) badReason() (string, bool) {
	if len(c) == 1 && strings.HasPrefix(c[0], badCmds) {
		return c[0][len(badCmds):], true
	}
	return "", false
}

func (c *Cmds) decode(data []byte) error {
	var v struct {
		V any `toml:"v"`
	}
	if err := toml.Unmarshal(append([]byte("v = "), data...), &v); err != nil {
		return fmt.Errorf("want a command or a list of commands: %w", err)
	}
	switch x := v.V.(type) {
	case string:
		if strings.TrimSpace(x) == "" {
			*c = nil
			return nil
		}
		*c = Cmds{x}
		return nil
	case []any:
		out := make(Cmds, 0, len(x))
		for i, e := range x {
			s, ok := e.(string)
			if !ok {
				return fmt.Errorf("element %d is %v, not a command (a quoted string)", i, e)
			}
			out = append(out, s)
		}
		*c = out
		return nil
	}
	return fmt.Errorf("%v is not a command (a quoted string) nor a list of commands", v.V)
}

// Empty reports whether the key gives no command.
func (c Cmds) Empty() bool { return len(c) == 0 }

// Dialect is how an instrument departs from the IEEE 488.2 common
// commands, and how it wants its numbers: the [dialect] table of every
// SCPI profile. Every key is optional.
type Dialect struct {
	// Clear is sent when the bench opens, before anything else but
	// *IDN?. Default "*CLS" (IEEE 488.2 §10.3); "" sends nothing.
	Clear *string `toml:"clear"`
	// ErrorQuery reads one entry of the error queue. Default
	// "SYST:ERR?" (SCPI-1999 Vol 2 §21.8); "" for an instrument without
	// one (then check_errors must be false).
	ErrorQuery *string `toml:"error_query"`
	// OPCQuery answers 1 when every pending operation is done. Default
	// "*OPC?" (IEEE 488.2 §10.19); "" for an instrument without one.
	OPCQuery *string `toml:"opc_query"`
	// WaitAfterSettings is what rolloff waits for after a setting:
	// "" (nothing), "opc" (the operation-complete query answers 1) or
	// "delay" (DelayAfterSettingsS).
	WaitAfterSettings string `toml:"wait_after_settings"`
	// DelayAfterSettingsS is the wait after a setting for "delay", and
	// the wait that confirms a halt on an instrument with neither an
	// operation-complete query nor a way to read its output state.
	// Seconds, 0 to 10.
	DelayAfterSettingsS float64 `toml:"delay_after_settings_s"`
	// Digits is the number of significant digits numbers are sent with
	// (1 to 17, default 6: common practice); the value sent, rounded, is
	// the value recorded.
	Digits int `toml:"digits"`
	// NumberForm is "shortest" (default: the fewest digits, e.g. 1000 or
	// 0.0792447) or "nr3" (always mantissa and exponent, 1.00000E+03).
	NumberForm string `toml:"number_form"`
}

// Response is the [response] table: how the instrument writes its
// answers when it departs from IEEE 488.2.
type Response struct {
	// StripSuffixes are unit words after a number to ignore, e.g.
	// ["VDC", "V"] for "+1.0E-01 VDC".
	StripSuffixes []string `toml:"strip_suffixes"`
	// OverloadWords are answers meaning an overload, e.g. ["OVLD"]: the
	// reading is flagged, as for 9.9E37.
	OverloadWords []string `toml:"overload_words"`
	// TrailingSeparator accepts a ',' after the last reading of a burst.
	TrailingSeparator bool `toml:"trailing_separator"`
	// LenientIdentity accepts a *IDN? answer of 2 or 3 fields.
	LenientIdentity bool `toml:"lenient_identity"`
}

// Wait values.
const (
	WaitNone  = ""
	WaitOPC   = "opc"
	WaitDelay = "delay"
)

const maxDelayAfterSettingsS = 10

func optCmd(v *string, def string) string {
	if v == nil {
		return def
	}
	return strings.TrimSpace(*v)
}

// ClearCommand returns the command sent at open, or "".
func (d Dialect) ClearCommand() string { return optCmd(d.Clear, "*CLS") }

// ErrorQueryCommand returns the error query, or "" when there is none.
func (d Dialect) ErrorQueryCommand() string { return optCmd(d.ErrorQuery, scpi.DefaultErrorQuery) }

// OPCQueryCommand returns the operation-complete query, or "".
func (d Dialect) OPCQueryCommand() string { return optCmd(d.OPCQuery, scpi.DefaultOPCQuery) }

// NumberFormat returns the format numbers are sent in.
func (d Dialect) NumberFormat() scpi.NumberFormat {
	return scpi.NumberFormat{Digits: d.Digits, NR3: d.NumberForm == "nr3"}
}

// DelayAfterSettings returns the fixed wait as wall time.
func (d Dialect) DelayAfterSettings() time.Duration {
	return time.Duration(d.DelayAfterSettingsS * float64(time.Second))
}

// Format returns the response table as the session reads it.
func (r Response) Format() scpi.ResponseFormat {
	return scpi.ResponseFormat{Suffixes: r.StripSuffixes, OverloadWords: r.OverloadWords, TrailingSeparator: r.TrailingSeparator, LenientIdentity: r.LenientIdentity}
}

// SessionOpts returns the SCPI session settings of a profile with
// framing f, dialect d and response table r.
func SessionOpts(f Framing, d Dialect, r Response) *scpi.Opts {
	o := &scpi.Opts{QueryTimeout: f.QueryTimeout(), InterCommandDelay: f.CommandDelay(), Response: r.Format()}
	if q := d.ErrorQueryCommand(); q == "" {
		o.NoErrorQuery = true
	} else {
		o.ErrorQuery = q
	}
	if q := d.OPCQueryCommand(); q == "" {
		o.NoOPCQuery = true
	} else {
		o.OPCQuery = q
	}
	return o
}

func (d *Dialect) validate(p *problems, checkErrors bool) {
	for _, c := range []struct {
		key   string
		v     *string
		query bool
	}{{"dialect.clear", d.Clear, false}, {"dialect.error_query", d.ErrorQuery, true}, {"dialect.opc_query", d.OPCQuery, true}} {
		if c.v == nil || strings.TrimSpace(*c.v) == "" {
			continue
		}
		t := compileTemplate(p, c.key, *c.v, false)
		if t == nil {
			continue
		}
		if c.query != strings.HasSuffix(strings.TrimSpace(*c.v), "?") {
			want := "a command (no '?')"
			if c.query {
				want = "a query (ending in '?')"
			}
			p.add(c.key, *c.v, want, "wrong kind of command")
		}
	}
	if checkErrors && d.ErrorQueryCommand() == "" {
		p.add("dialect.error_query", "", `an error query (e.g. "SYST:ERR?"), or check_errors = false`, "check_errors without an error query")
	}
	switch d.WaitAfterSettings {
	case WaitNone, WaitDelay:
	case WaitOPC:
		if d.OPCQueryCommand() == "" {
			p.add("dialect.wait_after_settings", d.WaitAfterSettings, `"delay" or "", since dialect.opc_query is ""`, "no operation-complete query to wait for")
		}
	default:
		p.add("dialect.wait_after_settings", d.WaitAfterSettings, `"" (no wait), "opc" or "delay"`, "unknown wait")
	}
	if !finite(d.DelayAfterSettingsS) || d.DelayAfterSettingsS < 0 || d.DelayAfterSettingsS > maxDelayAfterSettingsS {
		p.add("dialect.delay_after_settings_s", d.DelayAfterSettingsS, fmt.Sprintf("0 to %d seconds", maxDelayAfterSettingsS), "bad delay")
	} else if d.WaitAfterSettings == WaitDelay && d.DelayAfterSettingsS == 0 {
		p.add("dialect.delay_after_settings_s", d.DelayAfterSettingsS, fmt.Sprintf(`more than 0, at most %d seconds, with wait_after_settings = "delay"`, maxDelayAfterSettingsS), "no delay to wait")
	}
	if d.Digits != 0 && (d.Digits < 1 || d.Digits > scpi.MaxDigits) {
		p.add("dialect.digits", d.Digits, fmt.Sprintf("1 to %d (0 or absent: %d)", scpi.MaxDigits, scpi.DefaultDigits), "bad number of digits")
	}
	switch d.NumberForm {
	case "", "shortest", "nr3":
	default:
		p.add("dialect.number_form", d.NumberForm, `"shortest" or "nr3"`, "unknown number form")
	}
}

func (r *Response) validate(p *problems) {
	for i, s := range r.StripSuffixes {
		if !isWordText(s) {
			p.add(fmt.Sprintf("response.strip_suffixes[%d]", i), s, "letters only, e.g. VDC", "not a unit word")
		}
	}
	for i, s := range r.OverloadWords {
		if !isWordText(s) {
			p.add(fmt.Sprintf("response.overload_words[%d]", i), s, "letters (and digits after the first), e.g. OVLD", "not an overload word")
		}
	}
}

func isWordText(s string) bool {
	if s == "" || len(s) > 16 || !isLetter(s[0]) {
		return false
	}
	for i := 0; i < len(s); i++ {
		if !isLetter(s[i]) && !('0' <= s[i] && s[i] <= '9') {
			return false
		}
	}
	return true
}
