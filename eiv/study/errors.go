package study

import (
	"errors"
	"fmt"
	"strings"

	"eivfit/eiv"
)

// Kind classifies an Error.
type Kind int

const (
	// Invalid is an option or a value outside its documented range.
	Invalid Kind = iota + 1
	// Unfittable is data that a method cannot fit (too few points, a
	// constant x, a fit that does not converge, a result that is not finite).
	Unfittable
	// TooLarge is a request beyond the limits (Limits).
	TooLarge
)

func (k Kind) String() string {
	switch k {
	case Invalid:
		return "invalid"
	case Unfittable:
		return "unfittable"
	case TooLarge:
		return "too large"
	}
	return fmt.Sprintf("Kind(%d)", int(k))
}

// Field names an Error may carry besides the data columns (x, y, sx, sy, r,
// id, order) and the options (lambda, confidence, methods, at,
// bootstrap/resamples, bootstrap/scheme, error_model, allowable_bias/…,
// decision_levels, exclude).
const (
	// FieldData is the dataset as a whole (too few points, a constant x).
	FieldData = "data"
	// FieldMethod is the method named by Error.Method (it did not
	// converge, or it needs columns the data lack).
	FieldMethod = "method"
)

// Error is a study's error: what is wrong (Kind), where (Field, with Index
// for a data point or a list entry), for which method (Method, when a
// method's fit failed), and why (Err, often one of eiv's errors).
type Error struct {
	Kind Kind
	// Field is an option's name as a slash path (bootstrap/resamples,
	// allowable_bias/percent), a data column, FieldData or FieldMethod.
	Field string
	// Index is the data point (for a column) or the list entry (methods,
	// decision_levels, exclude), or -1.
	Index  int
	Method string
	Err    error
}

func (e *Error) Error() string {
	msg := strings.TrimPrefix(e.Err.Error(), "eiv: ")
	if e.Method != "" {
		return e.Method + ": " + msg
	}
	return msg
}

func (e *Error) Unwrap() error { return e.Err }

// ErrorList is several invalid options or values found at once (at most
// maxErrors), in the order they were checked.
type ErrorList []*Error

func (l ErrorList) Error() string {
	if len(l) == 1 {
		return l[0].Error()
	}
	return fmt.Sprintf("%d fields are invalid; the first: %s", len(l), l[0].Error())
}

// Unwrap gives the errors for errors.Is and errors.As.
func (l ErrorList) Unwrap() []error {
	out := make([]error, len(l))
	for i, e := range l {
		out[i] = e
	}
	return out
}

const maxErrors = 20

// checker gathers invalid fields, up to maxErrors.
type checker struct{ errs ErrorList }

func (c *checker) add(field string, index int, format string, a ...any) {
	if len(c.errs) < maxErrors {
		c.errs = append(c.errs, &Error{Kind: Invalid, Field: field, Index: index, Err: fmt.Errorf(format, a...)})
	}
}

func (c *checker) err() error {
	if len(c.errs) == 0 {
		return nil
	}
	return c.errs
}

// fitError classifies an error of method m's fit. index maps a point of
// the fitted sample to the caller's data (nil: the same).
func fitError(err error, m string, index func(int) int) *Error {
	var se *Error
	if errors.As(err, &se) {
		return se
	}
	var pe *eiv.PointError
	var oe *eiv.OptionError
	var ce *eiv.ConvergenceError
	e := &Error{Kind: Unfittable, Field: FieldMethod, Index: -1, Method: m, Err: err}
	switch {
	case errors.As(err, &pe):
		e.Field, e.Index = pe.Field, pe.Index
		if index != nil {
			e.Index = index(pe.Index)
		}
	case errors.As(err, &ce):
	case errors.As(err, &oe):
		if oe.Option != "sx, sy" {
			e.Kind, e.Field = Invalid, oe.Option
		}
	case errors.Is(err, eiv.ErrTooFewPoints), errors.Is(err, eiv.ErrConstantX),
		errors.Is(err, eiv.ErrDegenerate), errors.Is(err, eiv.ErrLengthMismatch),
		errors.Is(err, eiv.ErrMagnitude):
		e.Field = FieldData
	}
	return e
}
