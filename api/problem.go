package api

import (
	"errors"
	"fmt"
	"net/http"
	"strings"

	"eivfit/eiv"
)

// Problem is an RFC 9457 problem detail, the body of every error answer
// (media type application/problem+json).
type Problem struct {
	Type     string       `json:"type"`
	Title    string       `json:"title"`
	Status   int          `json:"status"`
	Detail   string       `json:"detail,omitempty"`
	Instance string       `json:"instance,omitempty"`
	Errors   []FieldError `json:"errors,omitempty"`
	// RetryAfter, when set, is sent as the Retry-After header (seconds).
	RetryAfter int `json:"-"`
}

// FieldError names one offending field: Pointer is an RFC 6901 JSON pointer
// into the request body (or "row N, column C" for CSV input).
type FieldError struct {
	Pointer string `json:"pointer"`
	Detail  string `json:"detail"`
}

func (p *Problem) Error() string {
	var b strings.Builder
	b.WriteString(p.Title)
	if p.Detail != "" {
		b.WriteString(": ")
		b.WriteString(p.Detail)
	}
	for _, e := range p.Errors {
		fmt.Fprintf(&b, "; %s: %s", e.Pointer, e.Detail)
	}
	return b.String()
}

// Problem kinds. Each has one type URI, title and status; the one function
// problemFor maps errors to them.
type kind struct {
	slug   string
	title  string
	status int
}

var (
	kindInvalid       = kind{"invalid-request", "The request is not valid", http.StatusBadRequest}
	kindUnfittable    = kind{"unfittable-data", "The data cannot be fitted", http.StatusUnprocessableEntity}
	kindMediaType     = kind{"unsupported-media-type", "Unsupported media type", http.StatusUnsupportedMediaType}
	kindNotAcceptable = kind{"not-acceptable", "No acceptable representation", http.StatusNotAcceptable}
	kindTooLarge      = kind{"body-too-large", "The request body is too large", http.StatusRequestEntityTooLarge}
	kindMethod        = kind{"method-not-allowed", "Method not allowed", http.StatusMethodNotAllowed}
	kindNotFound      = kind{"not-found", "Not found", http.StatusNotFound}
	kindBusy          = kind{"busy", "All compute slots are busy", http.StatusServiceUnavailable}
	kindBodyBudget    = kind{"body-budget-full", "The server's memory budget for request bodies is full", http.StatusServiceUnavailable}
	kindBodyTimeout   = kind{"body-timeout", "The request body did not arrive in time", http.StatusRequestTimeout}
	kindDeadline      = kind{"deadline-exceeded", "The computation ran past the request deadline", http.StatusServiceUnavailable}
	kindUnauthorized  = kind{"unauthorized", "Missing or invalid API key", http.StatusUnauthorized}
	kindInternal      = kind{"internal", "Internal error", http.StatusInternalServerError}
)

// ProblemTypeBase prefixes every problem type URI.
const ProblemTypeBase = "urn:eivfit:problem:"

func newProblem(k kind, detail string, errs ...FieldError) *Problem {
	return &Problem{Type: ProblemTypeBase + k.slug, Title: k.title, Status: k.status, Detail: detail, Errors: errs}
}

func invalid(pointer, detail string) *Problem {
	return newProblem(kindInvalid, detail, FieldError{Pointer: pointer, Detail: detail})
}

// locator turns a point index and a column name into the place the client
// sees: a JSON pointer, or a CSV row and column.
type locator func(index int, field string) string

func jsonLocator(base string) locator {
	return func(i int, field string) string {
		if i < 0 {
			return base
		}
		if field == "" {
			return fmt.Sprintf("%s/%d", base, i)
		}
		return fmt.Sprintf("%s/%d/%s", base, i, field)
	}
}

// fitProblem maps an error from the eiv package to a problem. Data that
// cannot be fitted is 422; an option out of range is 400.
func fitProblem(err error, method eiv.Method, loc locator, methodPointer string) *Problem {
	var pe *eiv.PointError
	var oe *eiv.OptionError
	var ce *eiv.ConvergenceError
	detail := fmt.Sprintf("%s: %s", method, strings.TrimPrefix(err.Error(), "eiv: "))
	switch {
	case errors.As(err, &pe):
		return newProblem(kindUnfittable, detail, FieldError{Pointer: loc(pe.Index, pe.Field), Detail: detail})
	case errors.As(err, &ce):
		return newProblem(kindUnfittable, detail, FieldError{Pointer: methodPointer, Detail: detail})
	case errors.As(err, &oe):
		p := "/" + oe.Option
		if oe.Option == "sx, sy" {
			p = methodPointer
			return newProblem(kindUnfittable, detail, FieldError{Pointer: p, Detail: detail})
		}
		return newProblem(kindInvalid, detail, FieldError{Pointer: p, Detail: detail})
	case errors.Is(err, eiv.ErrTooFewPoints), errors.Is(err, eiv.ErrConstantX),
		errors.Is(err, eiv.ErrDegenerate), errors.Is(err, eiv.ErrLengthMismatch),
		errors.Is(err, eiv.ErrMagnitude):
		return newProblem(kindUnfittable, detail, FieldError{Pointer: loc(-1, ""), Detail: detail})
	}
	return newProblem(kindUnfittable, detail, FieldError{Pointer: methodPointer, Detail: detail})
}
