package plan

import (
	"errors"
	"strconv"
	"strings"
)

// FieldError is a problem with one field of a plan: where it is, what was
// given and what is allowed. Decoding and validation return it (or several,
// joined with errors.Join); test with errors.As.
type FieldError struct {
	File    string // file or request name the plan came from; may be empty
	Line    int    // 1-based line of the key, 0 when unknown
	Field   string // dotted key, e.g. "frequencies.start_hz" or "frequencies.frequencies_hz[2]"
	Value   string // the value as given (strings quoted); may be empty
	Allowed string // what is wrong and what is allowed
}

// Error formats the error as "file:line: field = value: allowed", leaving
// out the parts that are unknown.
func (e *FieldError) Error() string {
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
	b.WriteString(e.Allowed)
	return b.String()
}

// FieldErrors returns every *FieldError in err, looking through
// errors.Join trees and %w wrapping, in order.
func FieldErrors(err error) []*FieldError {
	var out []*FieldError
	var walk func(error)
	walk = func(err error) {
		if err == nil {
			return
		}
		if fe, ok := err.(*FieldError); ok {
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

// join returns nil, the single error, or all of them joined.
func join(errs []error) error {
	switch len(errs) {
	case 0:
		return nil
	case 1:
		return errs[0]
	}
	return errors.Join(errs...)
}

// fmtFloat formats a number as given in a file: shortest exact form.
func fmtFloat(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }
