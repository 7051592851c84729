package scpiserver

import (
	"fmt"
	"strings"
)

// Standard error/event numbers used by the simulated instruments
// (SCPI-1999 Vol 1 §21.8.9-§21.8.12).
const (
	NoError             = 0
	CommandError        = -100
	InvalidCharacter    = -101
	SyntaxError         = -102
	InvalidSeparator    = -103
	DataTypeError       = -104
	ParameterNotAllowed = -108
	MissingParameter    = -109
	HeaderError         = -110
	HeaderSeparator     = -111
	MnemonicTooLong     = -112
	UndefinedHeader     = -113
	HeaderSuffixRange   = -114
	NumericDataError    = -120
	InvalidSuffix       = -131
	SuffixNotAllowed    = -138
	InvalidCharData     = -141
	CharDataTooLong     = -144
	InvalidStringData   = -151
	InvalidBlockData    = -161
	InvalidExpression   = -171
	ExecutionError      = -200
	InitIgnored         = -213
	ParameterError      = -220
	SettingsConflict    = -221
	DataOutOfRange      = -222
	TooMuchData         = -223
	IllegalParameter    = -224
	DataStale           = -230
	DeviceError         = -300
	SystemError         = -310
	OutOfMemory         = -321
	QueueOverflow       = -350
	QueryError          = -400
	QueryInterrupted    = -410
)

// stdMessages are the standard descriptions, SCPI-1999 Vol 1 §21.8.
var stdMessages = map[int]string{
	NoError:             "No error",
	CommandError:        "Command error",
	InvalidCharacter:    "Invalid character",
	SyntaxError:         "Syntax error",
	InvalidSeparator:    "Invalid separator",
	DataTypeError:       "Data type error",
	ParameterNotAllowed: "Parameter not allowed",
	MissingParameter:    "Missing parameter",
	HeaderError:         "Command header error",
	HeaderSeparator:     "Header separator error",
	MnemonicTooLong:     "Program mnemonic too long",
	UndefinedHeader:     "Undefined header",
	HeaderSuffixRange:   "Header suffix out of range",
	NumericDataError:    "Numeric data error",
	InvalidSuffix:       "Invalid suffix",
	SuffixNotAllowed:    "Suffix not allowed",
	InvalidCharData:     "Invalid character data",
	CharDataTooLong:     "Character data too long",
	InvalidStringData:   "Invalid string data",
	InvalidBlockData:    "Invalid block data",
	InvalidExpression:   "Invalid expression",
	ExecutionError:      "Execution error",
	InitIgnored:         "Init ignored",
	ParameterError:      "Parameter error",
	SettingsConflict:    "Settings conflict",
	DataOutOfRange:      "Data out of range",
	TooMuchData:         "Too much data",
	IllegalParameter:    "Illegal parameter value",
	DataStale:           "Data corrupt or stale",
	DeviceError:         "Device-specific error",
	SystemError:         "System error",
	OutOfMemory:         "Out of memory",
	QueueOverflow:       "Queue overflow",
	QueryError:          "Query error",
	QueryInterrupted:    "Query INTERRUPTED",
}

// Message returns the standard description of an error number, or the
// description of its class (-100, -200, -300, -400) for numbers without
// one of their own.
func Message(code int) string {
	if m, ok := stdMessages[code]; ok {
		return m
	}
	switch {
	case code <= -100 && code > -200:
		return stdMessages[CommandError]
	case code <= -200 && code > -300:
		return stdMessages[ExecutionError]
	case code <= -300 && code > -400:
		return stdMessages[DeviceError]
	case code <= -400 && code > -500:
		return stdMessages[QueryError]
	}
	return "Device-specific error"
}

// Error is one entry of the error/event queue. Info is the optional
// device-dependent part that follows the description after ";"
// (SCPI-1999 §21.8.1).
type Error struct {
	Code int
	Msg  string
	Info string
}

// Errorf returns an Error with the standard description of code and the
// formatted device-dependent information.
func Errorf(code int, format string, args ...any) *Error {
	info := ""
	if format != "" {
		info = fmt.Sprintf(format, args...)
	}
	return &Error{Code: code, Msg: Message(code), Info: info}
}

// Error implements error.
func (e *Error) Error() string {
	return e.Entry()
}

// Entry formats the error as SYSTem:ERRor? answers it: the number, a comma
// and the quoted description (embedded quotes doubled, IEEE 488.2 §8.7.8).
func (e *Error) Entry() string {
	text := e.Msg
	if e.Info != "" {
		text += ";" + e.Info
	}
	text = sanitize(text)
	return fmt.Sprintf("%d,\"%s\"", e.Code, strings.ReplaceAll(text, `"`, `""`))
}

// sanitize keeps printable ASCII only and bounds the length, so that a
// hostile header cannot break the response framing.
func sanitize(s string) string {
	const maxLen = 255 // SCPI-1999 §21.8.1: at most 255 characters
	var b strings.Builder
	for _, r := range s {
		if r < 0x20 || r > 0x7e {
			r = '?'
		}
		b.WriteRune(r)
		if b.Len() >= maxLen {
			break
		}
	}
	return b.String()
}

// esrBit returns the Standard Event Status Register bit an error sets
// (IEEE 488.2 §11.5.1.1): command error CME, execution error EXE,
// device-dependent error DDE, query error QYE.
func esrBit(code int) byte {
	switch {
	case code <= -100 && code > -200:
		return ESRCommandError
	case code <= -200 && code > -300:
		return ESRExecutionError
	case code <= -300 && code > -400:
		return ESRDeviceError
	case code <= -400 && code > -500:
		return ESRQueryError
	case code > 0:
		return ESRDeviceError
	}
	return 0
}

// Standard Event Status Register bits (IEEE 488.2 §11.5.1.1).
const (
	ESROperationComplete byte = 1 << 0
	ESRQueryError        byte = 1 << 2
	ESRDeviceError       byte = 1 << 3
	ESRExecutionError    byte = 1 << 4
	ESRCommandError      byte = 1 << 5
	ESRPowerOn           byte = 1 << 7
)

// Status Byte bits (IEEE 488.2 §11.2; EAV is SCPI-1999 §9.4's error/event
// queue summary).
const (
	STBErrorAvailable byte = 1 << 2
	STBMessage        byte = 1 << 4
	STBEventSummary   byte = 1 << 5
	STBRequest        byte = 1 << 6
)
