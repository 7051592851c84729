// Package fielderr is the one error type for a bad field of a document
// the program reads — an instrument profile, a bench file and its [sim]
// table, a plan, a stored record, a request — naming where it is, what was
// given and what is allowed. The packages that decode documents export it
// under their own names (profile.FieldError, plan.FieldError,
// sim.ConfigError); it is one type, so errors.As finds it whichever
// decoder returned it.
package fielderr

import (
	"errors"
	"fmt"
	"strconv"
	"strings"
)

// Error is a problem with one field of a document.
type Error struct {
	File  string // file or request name as given; may be empty
	Line  int    // 1-based line of the field, 0 when unknown
	Field string // dotted key, e.g. "commands.set_frequency", "ranges[2].name"
	Value string // the bad value as written (strings quoted); may be empty
	// Allowed says what is allowed. Without Msg or Err it is the whole
	// message: what is wrong and what is allowed.
	Allowed string
	Msg     string // what is wrong, when Allowed alone does not say it
	Err     error  // underlying cause, if any
}

// Error formats the problem as "file:line: field = value: msg: cause
// (allowed: ...)", or "file:line: field = value: allowed" when there is
// no Msg or cause, leaving out the parts that are unknown.
func (e *Error) Error() string {
	var b strings.Builder
	switch {
	case e.File != "" && e.Line > 0:
		b.WriteString(e.File + ":" + strconv.Itoa(e.Line) + ": ")
	case e.File != "":
		b.WriteString(e.File + ": ")
	case e.Line > 0:
		b.WriteString("line " + strconv.Itoa(e.Line) + ": ")
	}
	if e.Field != "" {
		b.WriteString(e.Field)
		if e.Value != "" {
			b.WriteString(" = " + e.Value)
		}
		b.WriteString(": ")
	}
	switch {
	case e.Msg != "":
		b.WriteString(e.Msg)
		if e.Err != nil && !e.errInMsg() {
			b.WriteString(": " + e.Err.Error())
		}
	case e.Err != nil:
		b.WriteString(e.Err.Error())
	case e.Allowed != "":
		b.WriteString(e.Allowed)
		return b.String()
	default:
		b.WriteString("invalid value")
	}
	if e.Allowed != "" {
		b.WriteString(" (allowed: " + e.Allowed + ")")
	}
	return b.String()
}

// summarizer is a cause that a message may already give in short (a
// command template's refusal gives its reason).
type summarizer interface{ Summary() string }

// errInMsg reports whether Msg already says what Err says.
func (e *Error) errInMsg() bool {
	var s summarizer
	return errors.As(e.Err, &s) && strings.HasSuffix(e.Msg, s.Summary())
}

// Unwrap returns the underlying cause.
func (e *Error) Unwrap() error { return e.Err }

// All returns every *Error in err, looking through errors.Join trees and
// %w wrapping, in order.
func All(err error) []*Error {
	var out []*Error
	var walk func(error)
	walk = func(err error) {
		if err == nil {
			return
		}
		if fe, ok := err.(*Error); ok {
			out = append(out, fe)
			return
		}
		switch u := err.(type) {
		case interface{ Unwrap() []error }:
			for _, e := range u.Unwrap() {
				walk(e)
			}
		case interface{ Unwrap() error }:
			walk(u.Unwrap())
		}
	}
	walk(err)
	return out
}

// FormatValue formats a value for Value: strings quoted, numbers in %g,
// lists of numbers as [a, b], nil as "".
func FormatValue(v any) string {
	switch x := v.(type) {
	case nil:
		return ""
	case string:
		return fmt.Sprintf("%q", x)
	case float64:
		return fmt.Sprintf("%g", x)
	case []float64:
		parts := make([]string, len(x))
		for i, f := range x {
			parts[i] = fmt.Sprintf("%g", f)
		}
		return "[" + strings.Join(parts, ", ") + "]"
	default:
		return fmt.Sprintf("%v", x)
	}
}
