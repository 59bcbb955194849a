package wire

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"net/http"
	"strings"
)

// fitOptions is FitRequest without its points, for the fast decoder.
type fitOptions struct {
	Methods    []string          `json:"methods,omitempty"`
	Lambda     *float64          `json:"lambda,omitempty"`
	Confidence *float64          `json:"confidence,omitempty"`
	Bootstrap  *BootstrapOptions `json:"bootstrap,omitempty"`
	At         []float64         `json:"at,omitempty"`
	XUnit      string            `json:"x_unit,omitempty"`
	YUnit      string            `json:"y_unit,omitempty"`
}

// decodeFitFast reads a FitRequest in one scan of the body: the points
// array goes straight to the column parser (encoding/json would scan it
// first, at a third of the speed), and the few other fields are copied
// into a small object that encoding/json decodes strictly. ok is false
// when the body is not a JSON object at all, for the general decoder to
// report.
func decodeFitFast(body []byte) (req *FitRequest, ok bool, err error) {
	p := &pointParser{b: body}
	p.ws()
	if p.pos >= len(body) || body[p.pos] != '{' {
		return nil, false, nil
	}
	p.pos++
	req = &FitRequest{}
	var rest bytes.Buffer
	rest.WriteByte('{')
	seenPoints := false
	p.ws()
	if p.pos < len(body) && body[p.pos] == '}' {
		p.pos++
	} else {
		for {
			p.ws()
			kstart := p.pos
			kb, kok := p.key()
			if !kok {
				return nil, false, nil
			}
			p.ws()
			if p.pos >= len(body) || body[p.pos] != ':' {
				return nil, false, nil
			}
			p.pos++
			p.ws()
			if string(kb) != "points" && strings.EqualFold(string(kb), "points") {
				// encoding/json would match the key without regard to case; the
				// fields are named exactly.
				return nil, true, Invalid("/"+escapePointer(string(kb)), fmt.Sprintf("unknown field %q", string(kb)))
			}
			if string(kb) == "points" {
				if seenPoints {
					return nil, true, Invalid("/points", "points appears twice")
				}
				seenPoints = true
				p.d = &req.Points
				if err := p.parse(); err != nil {
					return nil, true, err
				}
			} else {
				vstart := p.pos
				end, err := skipValue(body, p.pos)
				if err != nil {
					return nil, false, nil // the general decoder names the place
				}
				if rest.Len() > 1 {
					rest.WriteByte(',')
				}
				rest.Write(body[kstart:p.posAfterKey(kstart)])
				rest.WriteByte(':')
				rest.Write(body[vstart:end])
				p.pos = end
			}
			p.ws()
			if p.pos >= len(body) {
				return nil, false, nil
			}
			if body[p.pos] == ',' {
				p.pos++
				continue
			}
			if body[p.pos] == '}' {
				p.pos++
				break
			}
			return nil, false, nil
		}
	}
	p.ws()
	if p.pos != len(body) {
		return nil, true, Invalid("", "the body holds more than one JSON value")
	}
	rest.WriteByte('}')
	if !json.Valid(rest.Bytes()) {
		// A syntax error among the options: the general decoder names it
		// at its offset in the body as sent, not in this copy.
		return nil, false, nil
	}
	var o fitOptions
	if err := decodeStrict(&rest, &o); err != nil {
		return nil, true, err
	}
	req.Methods, req.Lambda, req.Confidence, req.Bootstrap, req.At = o.Methods, o.Lambda, o.Confidence, o.Bootstrap, o.At
	req.XUnit, req.YUnit = o.XUnit, o.YUnit
	return req, true, nil
}

// posAfterKey returns the end of the quoted key starting at k.
func (p *pointParser) posAfterKey(k int) int {
	for j := k + 1; j < len(p.b); j++ {
		switch p.b[j] {
		case '\\':
			j++
		case '"':
			return j + 1
		}
	}
	return len(p.b)
}

// skipValue returns the end of the JSON value starting at i, checking only
// enough to find it (strings, nesting); encoding/json checks the rest.
func skipValue(b []byte, i int) (int, error) {
	depth := 0
	for i < len(b) {
		switch c := b[i]; c {
		case '"':
			i++
			for i < len(b) && b[i] != '"' {
				if b[i] == '\\' {
					i++
				}
				i++
			}
			if i >= len(b) {
				return 0, errors.New("unterminated string")
			}
			i++
		case '{', '[':
			depth++
			i++
		case '}', ']':
			if depth == 0 {
				return i, nil
			}
			depth--
			i++
		case ',':
			if depth == 0 {
				return i, nil
			}
			i++
		default:
			i++
		}
		if depth == 0 && i < len(b) {
			// A scalar or a closed container ends at the next delimiter.
			j := i
			for j < len(b) && (b[j] == ' ' || b[j] == '\t' || b[j] == '\n' || b[j] == '\r') {
				j++
			}
			if j >= len(b) || b[j] == ',' || b[j] == '}' {
				return i, nil
			}
		}
	}
	return 0, errors.New("unexpected end")
}

// SizedReader is a body whose length is known in advance (an HTTP body
// with Content-Length), so that reading it allocates once.
type SizedReader struct {
	io.Reader
	N int64
}

// readBody reads a whole body, passing a size-limit error through. A
// known length (SizedReader, bytes.Reader) sizes the buffer at once.
func readBody(r io.Reader) ([]byte, error) {
	var n int64 = -1
	switch v := r.(type) {
	case SizedReader:
		n = v.N
	case *SizedReader:
		n = v.N
	case interface{ Len() int }:
		n = int64(v.Len())
	}
	if n >= 0 && n < 1<<31 {
		buf := make([]byte, n)
		if _, err := io.ReadFull(r, buf); err != nil {
			return nil, readErr(err)
		}
		rest, err := io.ReadAll(r) // nothing, unless the length was understated
		if err != nil {
			return nil, readErr(err)
		}
		return append(buf, rest...), nil
	}
	body, err := io.ReadAll(r)
	if err != nil {
		return nil, readErr(err)
	}
	return body, nil
}

func readErr(err error) error {
	var mbe *http.MaxBytesError
	if errors.As(err, &mbe) {
		return mbe
	}
	return Invalid("", fmt.Sprintf("the body could not be read: %v", err))
}
