package wire

import (
	"fmt"
	"net/http"
	"strings"
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

// Kind is a problem's kind: one type URI, title and status each.
type Kind struct {
	slug   string
	title  string
	status int
}

// Status is the HTTP status of the kind.
func (k Kind) Status() int { return k.status }

var (
	KindInvalid       = Kind{"invalid-request", "The request is not valid", http.StatusBadRequest}
	KindUnfittable    = Kind{"unfittable-data", "The data cannot be fitted", http.StatusUnprocessableEntity}
	KindMediaType     = Kind{"unsupported-media-type", "Unsupported media type", http.StatusUnsupportedMediaType}
	KindNotAcceptable = Kind{"not-acceptable", "No acceptable representation", http.StatusNotAcceptable}
	KindTooLarge      = Kind{"body-too-large", "The request body is too large", http.StatusRequestEntityTooLarge}
	KindMethod        = Kind{"method-not-allowed", "Method not allowed", http.StatusMethodNotAllowed}
	KindNotFound      = Kind{"not-found", "Not found", http.StatusNotFound}
	KindBusy          = Kind{"busy", "All compute slots are busy", http.StatusServiceUnavailable}
	KindBodyBudget    = Kind{"body-budget-full", "The server's memory budget for request bodies is full", http.StatusServiceUnavailable}
	KindBodyTimeout   = Kind{"body-timeout", "The request body did not arrive in time", http.StatusRequestTimeout}
	KindDeadline      = Kind{"deadline-exceeded", "The computation ran past the request deadline", http.StatusServiceUnavailable}
	KindUnauthorized  = Kind{"unauthorized", "Missing or invalid API key", http.StatusUnauthorized}
	KindInternal      = Kind{"internal", "Internal error", http.StatusInternalServerError}
	KindForbidden     = Kind{"forbidden", "The API key's role does not allow this", http.StatusForbidden}
	KindConflict      = Kind{"conflict", "The record changed meanwhile", http.StatusConflict}
	KindStoreDown     = Kind{"store-unavailable", "The study store is unavailable", http.StatusServiceUnavailable}
)

// ProblemTypeBase prefixes every problem type URI.
const ProblemTypeBase = "urn:eivfit:problem:"

// NewProblem makes a problem of kind k.
func NewProblem(k Kind, detail string, errs ...FieldError) *Problem {
	return &Problem{Type: ProblemTypeBase + k.slug, Title: k.title, Status: k.status, Detail: detail, Errors: errs}
}

// Invalid is a 400 problem at one place.
func Invalid(pointer, detail string) *Problem {
	return NewProblem(KindInvalid, detail, FieldError{Pointer: pointer, Detail: detail})
}

// Prefixed returns a copy of p with every pointer moved under prefix.
func Prefixed(p *Problem, prefix string) *Problem {
	q := *p
	q.Errors = make([]FieldError, len(p.Errors))
	for i, e := range p.Errors {
		q.Errors[i] = FieldError{Pointer: prefix + e.Pointer, Detail: e.Detail}
	}
	return &q
}
