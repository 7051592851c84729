package plan

import (
	"errors"
	"strconv"

	"rolloff/internal/fielderr"
)

// FieldError is a problem with one field of a plan: where it is, what was
// given and what is allowed (Allowed says what is wrong and what is
// allowed). Decoding and validation return it (or several, joined with
// errors.Join); test with errors.As. It is the one field-error type of
// the program, the same as profile.FieldError.
type FieldError = fielderr.Error

// FieldErrors returns every *FieldError in err, looking through
// errors.Join trees and %w wrapping, in order.
func FieldErrors(err error) []*FieldError { return fielderr.All(err) }

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
