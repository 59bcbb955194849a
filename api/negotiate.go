package api

import (
	"fmt"
	"strconv"
	"strings"

	"eivfit/api/wire"

	"github.com/gin-gonic/gin"
)

// Content negotiation (RFC 9110 §12.5.1). An Accept header is a list of
// media ranges ("type/subtype", "type/*" or "*/*"), each with an optional
// weight q in [0, 1]; q=0 means "not acceptable". Each media type the server
// can produce takes the weight of the most specific range that matches it
// (a range with parameters other than q matches only an offer carrying the
// same parameters, and is more specific than the range without them).

// mediaRange is one element of an Accept header.
type mediaRange struct {
	typ, sub string
	params   map[string]string // parameters other than q, names lower-cased
	q        float64
	pos      int // position in the header, for ties
}

// specificity ranks ranges: */* < type/* < type/sub < type/sub;param.
func (m mediaRange) specificity() int {
	switch {
	case m.typ == "*":
		return 0
	case m.sub == "*":
		return 1
	}
	return 2 + len(m.params)
}

// parseAccept parses an Accept header; ok is false when it is malformed
// (a range without a slash, a weight that is not a number in [0, 1]).
// An empty header yields no ranges.
func parseAccept(h string) (ranges []mediaRange, ok bool) {
	for i, part := range strings.Split(h, ",") {
		part = strings.TrimSpace(part)
		if part == "" {
			continue
		}
		fields := strings.Split(part, ";")
		typ, sub, found := strings.Cut(strings.ToLower(strings.TrimSpace(fields[0])), "/")
		if !found || typ == "" || sub == "" || (typ == "*" && sub != "*") {
			return nil, false
		}
		m := mediaRange{typ: typ, sub: sub, q: 1, pos: i}
		for _, p := range fields[1:] {
			k, v, _ := strings.Cut(p, "=")
			k, v = strings.ToLower(strings.TrimSpace(k)), strings.Trim(strings.TrimSpace(v), `"`)
			if k == "" {
				continue
			}
			if k == "q" {
				q, err := strconv.ParseFloat(v, 64)
				if err != nil || !(q >= 0 && q <= 1) {
					return nil, false
				}
				m.q = q
				break // what follows q are accept-extensions, not media-type parameters
			}
			if m.params == nil {
				m.params = map[string]string{}
			}
			m.params[k] = strings.ToLower(v)
		}
		ranges = append(ranges, m)
	}
	return ranges, true
}

// matches says whether the range covers the offer "type/sub" (offers carry
// no parameters, so a range with parameters matches only "charset=utf-8"
// on text types, which every text answer of the service is).
func (m mediaRange) matches(offer string) bool {
	typ, sub, _ := strings.Cut(offer, "/")
	if m.typ != "*" && m.typ != typ || m.sub != "*" && m.sub != sub {
		return false
	}
	for k, v := range m.params {
		if !(k == "charset" && v == "utf-8") {
			return false
		}
	}
	return true
}

// negotiate picks, among offers (the server's preference first), the one
// the Accept header weighs highest. The weight of an offer is that of the
// most specific range matching it; ties go to the more specific match, then
// to the range listed first, then to the server's order. A missing or
// empty header accepts the first offer; ok is false when every offer has
// weight 0 (or the header is malformed and nothing can be trusted of it).
func negotiate(accept string, offers ...string) (string, bool) {
	if accept == "" || accept == "*/*" {
		return offers[0], true // the common cases, without parsing
	}
	ranges, valid := parseAccept(accept)
	if !valid {
		return "", false
	}
	if len(ranges) == 0 {
		return offers[0], true
	}
	best, bestQ, bestSpec, bestPos := "", 0.0, -1, 0
	for _, o := range offers {
		spec, q, pos := -1, 0.0, 0
		for _, m := range ranges {
			if s := m.specificity(); m.matches(o) && s > spec {
				spec, q, pos = s, m.q, m.pos
			}
		}
		if spec < 0 || q == 0 {
			continue
		}
		if q > bestQ || q == bestQ && (spec > bestSpec || spec == bestSpec && pos < bestPos) {
			best, bestQ, bestSpec, bestPos = o, q, spec, pos
		}
	}
	return best, best != ""
}

// accepts negotiates the answer's media type among offers; when none is
// acceptable it answers 406 (a problem document, which RFC 9110 allows
// whatever Accept says) and returns "".
func (s *Server) accepts(c *gin.Context, offers ...string) string {
	accept := strings.Join(c.Request.Header.Values("Accept"), ", ")
	mt, ok := negotiate(accept, offers...)
	if ok {
		return mt
	}
	detail := fmt.Sprintf("the Accept header %q admits none of what this resource can answer: %s", wire.Truncate(accept), strings.Join(offers, ", "))
	if _, valid := parseAccept(accept); !valid {
		detail = fmt.Sprintf("the Accept header %q is malformed: list media ranges such as application/json or text/html;q=0.5 (q from 0 to 1)", wire.Truncate(accept))
	}
	s.problem(c, wire.NewProblem(wire.KindNotAcceptable, detail, wire.FieldError{Pointer: "header Accept", Detail: detail}))
	return ""
}

// negotiated is middleware for a route whose answers are one of offers:
// it refuses with 406, before any body is read, a request whose Accept
// header admits none of them.
func (s *Server) negotiated(offers ...string) gin.HandlerFunc {
	return func(c *gin.Context) {
		if s.accepts(c, offers...) == "" {
			return
		}
		c.Next()
	}
}
