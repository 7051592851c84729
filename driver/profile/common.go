package profile

import (
	"bytes"
	"fmt"
	"math"
	"strings"
	"time"

	"github.com/pelletier/go-toml/v2"
)

// Profile kinds, the value of the top-level `kind` key.
const (
	KindGenerator = "scpi-generator"   // a SCPI-1999 function generator
	KindDMM       = "scpi-dmm"         // a SCPI-1999 DMM (DC and AC voltmeter)
	KindConverter = "analog-converter" // an analog true-RMS voltmeter used as a converter
	KindSwitch    = "scpi-switch"      // a SCPI-1999 switch or relay instrument
)

// Kinds lists the profile kinds, sorted.
func Kinds() []string {
	return []string{KindConverter, KindDMM, KindGenerator, KindSwitch}
}

// Framing is how messages are delimited and paced on the wire.
type Framing struct {
	// WriteTerminator ends every message sent: "\n", "\r\n" or "\r".
	// Default "\n" (IEEE 488.2 §7.5).
	WriteTerminator *string `toml:"write_terminator"`
	// ReadTerminator ends every response. Default "\n".
	ReadTerminator *string `toml:"read_terminator"`
	// QueryTimeoutS is how long a query waits for its answer, seconds.
	// Default 2.
	QueryTimeoutS float64 `toml:"query_timeout_s"`
	// CommandDelayS is the least time between two messages, seconds, for
	// instruments that drop commands sent back to back. Default 0.
	CommandDelayS float64 `toml:"command_delay_s"`
}

// Framing defaults.
const (
	DefaultTerminator    = "\n"
	DefaultQueryTimeoutS = 2.0
	maxQueryTimeoutS     = 600.0
	maxCommandDelayS     = 10.0
)

// WriteTerm returns the write terminator, defaulted.
func (f Framing) WriteTerm() string {
	if f.WriteTerminator == nil {
		return DefaultTerminator
	}
	return *f.WriteTerminator
}

// ReadTerm returns the read terminator, defaulted.
func (f Framing) ReadTerm() string {
	if f.ReadTerminator == nil {
		return DefaultTerminator
	}
	return *f.ReadTerminator
}

// QueryTimeout returns the query time-out, defaulted.
func (f Framing) QueryTimeout() time.Duration {
	s := f.QueryTimeoutS
	if s == 0 {
		s = DefaultQueryTimeoutS
	}
	return time.Duration(s * float64(time.Second))
}

// CommandDelay returns the inter-command delay.
func (f Framing) CommandDelay() time.Duration {
	return time.Duration(f.CommandDelayS * float64(time.Second))
}

var terminators = []string{"\n", "\r\n", "\r"}

const terminatorsAllowed = `"\n", "\r\n" or "\r"`

func (f Framing) validate(p *problems) {
	for _, t := range []struct {
		key string
		v   *string
	}{{"framing.write_terminator", f.WriteTerminator}, {"framing.read_terminator", f.ReadTerminator}} {
		if t.v == nil {
			continue
		}
		ok := false
		for _, a := range terminators {
			ok = ok || *t.v == a
		}
		if !ok {
			p.add(t.key, *t.v, terminatorsAllowed, "not a message terminator")
		}
	}
	if !finite(f.QueryTimeoutS) || f.QueryTimeoutS < 0 || f.QueryTimeoutS > maxQueryTimeoutS {
		p.add("framing.query_timeout_s", f.QueryTimeoutS, fmt.Sprintf("0 (default %g) or more, up to %g seconds", DefaultQueryTimeoutS, maxQueryTimeoutS), "query time-out out of range")
	}
	if !finite(f.CommandDelayS) || f.CommandDelayS < 0 || f.CommandDelayS > maxCommandDelayS {
		p.add("framing.command_delay_s", f.CommandDelayS, fmt.Sprintf("0 to %g seconds", maxCommandDelayS), "command delay out of range")
	}
}

// IdentityCheck is an optional check of the instrument's *IDN? answer
// (IEEE 488.2 §10.14) made when the bench is opened. Empty fields match
// anything.
type IdentityCheck struct {
	// Manufacturer must equal the first *IDN? field (case-insensitive).
	Manufacturer string `toml:"manufacturer"`
	// ModelPrefix must begin the second *IDN? field (case-insensitive).
	ModelPrefix string `toml:"model_prefix"`
}

// Match reports whether the identity fields satisfy the check.
func (c IdentityCheck) Match(manufacturer, model string) bool {
	if c.Manufacturer != "" && !strings.EqualFold(strings.TrimSpace(manufacturer), c.Manufacturer) {
		return false
	}
	if c.ModelPrefix != "" && !strings.HasPrefix(strings.ToLower(strings.TrimSpace(model)), strings.ToLower(c.ModelPrefix)) {
		return false
	}
	return true
}

func (c IdentityCheck) validate(p *problems) {
	for _, f := range []struct{ key, v string }{{"identity.manufacturer", c.Manufacturer}, {"identity.model_prefix", c.ModelPrefix}} {
		if strings.ContainsAny(f.v, ",\r\n") {
			p.add(f.key, f.v, "text without commas or line breaks", "cannot match one *IDN? field")
		}
	}
}

// decodeStrict decodes data into v, refusing unknown keys.
func decodeStrict(file string, data []byte, v any) error {
	d := toml.NewDecoder(bytes.NewReader(data))
	d.DisallowUnknownFields()
	d.EnableUnmarshalerInterface() // Cmds: a command or a list
	if err := d.Decode(v); err != nil {
		return decodeErrorIn(file, data, err, v)
	}
	return nil
}

// kindOf reads only the `kind` key of a profile.
func kindOf(file string, data []byte) (string, error) {
	var k struct {
		Kind string `toml:"kind"`
	}
	// Not strict: the rest of the document belongs to the kind's decoder.
	if err := toml.Unmarshal(data, &k); err != nil {
		return "", decodeErrorIn(file, data, err, &k)
	}
	return k.Kind, nil
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

func checkKind(p *problems, got, want string) {
	if got != want {
		p.add("kind", got, fmt.Sprintf("%q for this profile", want), "wrong profile kind")
	}
}

// Decode decodes and validates an instrument profile of any kind, chosen
// by its `kind` key: it returns a *Generator, *DMM, *Converter or *Switch.
func Decode(file string, data []byte) (any, error) {
	k, err := kindOf(file, data)
	if err != nil {
		return nil, err
	}
	var v any
	switch k {
	case KindGenerator:
		v, err = nilOnError(DecodeGenerator(file, data))
	case KindDMM:
		v, err = nilOnError(DecodeDMM(file, data))
	case KindConverter:
		v, err = nilOnError(DecodeConverter(file, data))
	case KindSwitch:
		v, err = nilOnError(DecodeSwitch(file, data))
	default:
		p := newProblems(file, data)
		p.add("kind", k, `"`+strings.Join(Kinds(), `", "`)+`"`, "unknown profile kind")
		return nil, p.err()
	}
	return v, err
}

// nilOnError returns a nil interface, not a typed nil, on error.
func nilOnError[T any](v *T, err error) (any, error) {
	if err != nil {
		return nil, err
	}
	return v, nil
}

// expectKind refuses a profile of another kind before its keys are
// decoded, so that the error names `kind` rather than every key.
func expectKind(file string, data []byte, want string) error {
	k, err := kindOf(file, data)
	if err != nil {
		return err
	}
	if k != want {
		p := newProblems(file, data)
		checkKind(p, k, want)
		return p.err()
	}
	return nil
}
