package driver

import (
	"context"
	"errors"
	"fmt"
)

// Sentinel errors. Implementations wrap them (fmt.Errorf("...: %w", ErrX))
// so that the cause stays visible while callers test with errors.Is.
var (
	// ErrOverload is an instrument's overflow answer (SCPI 9.9E37): the
	// input exceeds the range. It is not a number to plot.
	ErrOverload = errors.New("driver: overload")
	// ErrNegativeOverload is the SCPI negative-infinity answer (-9.9E37).
	ErrNegativeOverload = errors.New("driver: negative overload")
	// ErrNotANumber is the SCPI not-a-number answer (9.91E37).
	ErrNotANumber = errors.New("driver: not a number")
	// ErrTimeout means the instrument did not answer within the query
	// time-out. The command may already have taken effect.
	ErrTimeout = errors.New("driver: timeout")
	// ErrClosed is returned by any use of a closed connection or role.
	ErrClosed = errors.New("driver: closed")
	// ErrDisconnected means the link to the instrument dropped. A write
	// that fails this way may or may not have reached the instrument.
	ErrDisconnected = errors.New("driver: disconnected")
	// ErrMalformed is a response that cannot be parsed (corrupt or
	// truncated).
	ErrMalformed = errors.New("driver: malformed response")
	// ErrInstrument is an entry in the instrument's error queue.
	ErrInstrument = errors.New("driver: instrument error")
	// ErrOutOfRange is an argument outside an instrument's or profile's
	// limits; nothing was sent.
	ErrOutOfRange = errors.New("driver: argument out of range")
)

// Transient reports whether err is worth retrying after re-establishing the
// connection: a drop, a time-out or a malformed answer. An overload or an
// out-of-range argument is not transient.
func Transient(err error) bool {
	return errors.Is(err, ErrDisconnected) || errors.Is(err, ErrTimeout) || errors.Is(err, ErrMalformed)
}

// Identity is the answer to *IDN? split into its four IEEE 488.2 fields
// (IEEE 488.2-1992 §10.14).
type Identity struct {
	Manufacturer string `json:"manufacturer"`
	Model        string `json:"model"`
	Serial       string `json:"serial"`
	Firmware     string `json:"firmware"`
}

// String returns the identity as the comma-separated *IDN? answer.
func (id Identity) String() string {
	return fmt.Sprintf("%s,%s,%s,%s", id.Manufacturer, id.Model, id.Serial, id.Firmware)
}

// Identifier is an optional capability of any role: it reports the
// instrument's identity.
type Identifier interface {
	Identify(ctx context.Context) (Identity, error)
}

// Halter is implemented by every role that can drive a circuit. Halt puts
// the instrument into its inert state (for a generator: output off). It
// uses its own short time-out so that it works during shutdown.
type Halter interface {
	Halt() error
}

// GeneratorLimits are the settings a generator will accept on this bench.
// MaxVrms is the bench's amplitude limit, which protects the DUT; it may be
// lower than what the instrument itself can produce.
type GeneratorLimits struct {
	MinFreqHz float64 `json:"min_freq_hz"`
	MaxFreqHz float64 `json:"max_freq_hz"`
	MinVrms   float64 `json:"min_vrms"`
	MaxVrms   float64 `json:"max_vrms"`
}

// Generator is a sine source. Amplitudes are always in Vrms at the DUT
// input; the implementation converts to the instrument's unit and load.
// Setters refuse values outside Limits with ErrOutOfRange and send nothing.
type Generator interface {
	SetFrequency(ctx context.Context, freqHz float64) error
	SetAmplitude(ctx context.Context, vrms float64) error
	SetOutput(ctx context.Context, on bool) error
	Limits() GeneratorLimits
	Halter
}

// Aperture is a voltmeter's integration time, given either in power-line
// cycles (NPLC) or in seconds. Exactly one of the two is positive.
type Aperture struct {
	NPLC    float64 `json:"nplc,omitempty"`
	Seconds float64 `json:"seconds,omitempty"`
}

// Duration returns the aperture in seconds for the given line frequency.
func (a Aperture) Duration(lineHz float64) float64 {
	if a.Seconds > 0 {
		return a.Seconds
	}
	if lineHz <= 0 {
		lineHz = 50
	}
	return a.NPLC / lineHz
}

// DCConfig configures a DC voltage measurement. RangeV is the full-scale
// range in volts (0 lets the instrument choose, where it can).
type DCConfig struct {
	RangeV   float64  `json:"range_v"`
	Aperture Aperture `json:"aperture"`
}

// DCVoltmeter reads the converter's DC output.
type DCVoltmeter interface {
	ConfigureDC(ctx context.Context, cfg DCConfig) error
	ReadDC(ctx context.Context) (volts float64, err error)
}

// BurstReader is an optional capability of a voltmeter: n readings taken
// back to back at the configured aperture, returned together.
type BurstReader interface {
	ReadBurst(ctx context.Context, n int) ([]float64, error)
}

// LineFrequency is an optional capability of a voltmeter: the power-line
// frequency its NPLC apertures refer to.
type LineFrequency interface {
	LineHz() float64
}

// ACConfig configures a true-RMS AC voltage measurement on a DMM.
type ACConfig struct {
	RangeVrms float64  `json:"range_vrms"`
	Aperture  Aperture `json:"aperture"`
}

// ACVoltmeter is a DMM reading true RMS itself, for benches without an
// analog converter.
type ACVoltmeter interface {
	ConfigureAC(ctx context.Context, cfg ACConfig) error
	ReadAC(ctx context.Context) (vrms float64, err error)
}
