package wire

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"net/http"
	"strconv"
	"strings"

	"eivfit/eiv/study"
)

// Strict JSON reading. Every request body is read by one pass of a
// pointParser over the bytes: members are matched to the request's fields
// as they come, and every list is counted against its limit while it is
// read, so that a body of 60 MB holding 30 million list entries is refused
// at the entry past the limit instead of being decoded whole first. Keys
// are exact: an upper-case letter (METHODS, Lambda) or a key given twice is
// refused naming the key (encoding/json would take either silently).

// maxReplicates bounds the replicates of one sample per method, in JSON
// and CSV alike.
const maxReplicates = 20

// maxNameBytes bounds every name and id a request carries (x_name, y_name,
// unit, sample and point ids, dataset names, excluded ids, method names).
const maxNameBytes = 256

// maxDepth bounds the nesting of values that are skipped over.
const maxDepth = 64

// fitKeys are the members of a fit request.
var fitKeys = []string{"points", "methods", "lambda", "confidence", "bootstrap", "at", "x_unit", "y_unit"}

// DecodeFitJSON reads a FitRequest from JSON, strictly: unknown, repeated or
// case-variant keys, trailing data, non-numbers and numbers outside the
// double range are errors naming the field, and every list is counted
// against the limits as it is read (the server's, for a *Body it read;
// else DefaultLimits).
func DecodeFitJSON(r io.Reader) (*FitRequest, error) {
	req := &FitRequest{}
	if err := readDocument(r, fitKeys, func(p *pointParser, key []byte) error { return p.fitMember(req, key, "") }); err != nil {
		return nil, err
	}
	return req, nil
}

// document reads a whole body holding one object.
// readDocument reads r's body (within r's limits) as one JSON object,
// strictly: member reads the value of each key with the parser p, and
// known lists the keys an unknown or case-variant one is held against.
func readDocument(r io.Reader, known []string, member func(p *pointParser, key []byte) error) error {
	body, err := readBody(r)
	if err != nil {
		return err
	}
	p := &pointParser{b: body, lim: limitsOf(r)}
	return p.document("", func(key []byte) error { return member(p, key) }, known)
}

func (p *pointParser) document(base string, member func(key []byte) error, known []string) error {
	p.ws()
	if p.pos >= len(p.b) {
		return Invalid("", "the body is empty; send a JSON object")
	}
	if p.null() { // as encoding/json: nothing set, so validation names what is missing
		p.ws()
		if p.pos != len(p.b) {
			return Invalid("", "the body holds more than one JSON value")
		}
		return nil
	}
	if p.b[p.pos] != '{' {
		if p.b[p.pos] == '[' || p.b[p.pos] == '"' || p.b[p.pos] == 'n' || p.b[p.pos] == 't' || p.b[p.pos] == 'f' || p.b[p.pos] == '-' || (p.b[p.pos] >= '0' && p.b[p.pos] <= '9') {
			return Invalid(base, "the body must be a JSON object")
		}
		return p.syntax("an object")
	}
	if err := p.object(base, member, known); err != nil {
		return err
	}
	p.ws()
	if p.pos != len(p.b) {
		return Invalid("", "the body holds more than one JSON value")
	}
	return nil
}

// fitMember reads the value of one fit-request member; ptr is the pointer
// of the enclosing object ("" for a body, /datasets/i in a batch).
func (p *pointParser) fitMember(req *FitRequest, key []byte, ptr string) error {
	switch string(key) {
	case "points":
		p.d = &req.Points
		err := p.parse()
		if err != nil && ptr != "" {
			return prefixedErr(err, ptr)
		}
		return err
	case "methods":
		req.Methods = nil
		return p.array(ptr+"/methods", len(study.Methods), KindInvalid, "methods (each named once)", func(i int) error {
			s, err := p.text(fmt.Sprintf("%s/methods/%d", ptr, i), false)
			req.Methods = append(req.Methods, s)
			return err
		})
	case "lambda":
		return p.optNumber(ptr+"/lambda", &req.Lambda)
	case "confidence":
		return p.optNumber(ptr+"/confidence", &req.Confidence)
	case "bootstrap":
		if p.null() {
			req.Bootstrap = nil
			return nil
		}
		req.Bootstrap = &BootstrapOptions{}
		return p.bootstrap(ptr+"/bootstrap", req.Bootstrap)
	case "at":
		req.At = nil
		return p.array(ptr+"/at", p.lim.MaxAt, KindInvalid, "values in at", func(i int) error {
			v, err := p.number(fmt.Sprintf("%s/at/%d", ptr, i))
			req.At = append(req.At, v)
			return err
		})
	case "x_unit":
		s, err := p.text(ptr+"/x_unit", true)
		req.XUnit = s
		return err
	case "y_unit":
		s, err := p.text(ptr+"/y_unit", true)
		req.YUnit = s
		return err
	}
	return p.unknownKey(ptr, key, fitKeys)
}

var bootstrapKeys = []string{"resamples", "seed", "scheme"}

func (p *pointParser) bootstrap(ptr string, b *BootstrapOptions) error {
	return p.object(ptr, func(key []byte) error {
		switch string(key) {
		case "resamples":
			v, err := p.integer(ptr+"/resamples", false)
			b.Resamples = int(v)
			return err
		case "seed":
			if p.null() {
				b.Seed = nil
				return nil
			}
			v, err := p.integer(ptr+"/seed", true)
			u := uint64(v)
			b.Seed = &u
			return err
		case "scheme":
			s, err := p.text(ptr+"/scheme", true)
			b.Scheme = s
			return err
		}
		return p.unknownKey(ptr, key, bootstrapKeys)
	}, bootstrapKeys)
}

// UnmarshalJSON decodes strictly, so that a misspelt option inside
// "bootstrap" is named.
func (b *BootstrapOptions) UnmarshalJSON(data []byte) error {
	p := &pointParser{b: data, lim: DefaultLimits}
	*b = BootstrapOptions{}
	p.ws()
	if err := p.bootstrap("/bootstrap", b); err != nil {
		return err
	}
	p.ws()
	if p.pos != len(data) {
		return p.syntax("the end of the object")
	}
	return nil
}

// object reads the object at pos, calling member for each key; member must
// read the value. A key with an upper-case letter, or one given twice, is
// refused before member sees it. known lists the keys, for the messages.
func (p *pointParser) object(ptr string, member func(key []byte) error, known []string) error {
	p.ws()
	if p.pos >= len(p.b) || p.b[p.pos] != '{' {
		if p.pos < len(p.b) && p.b[p.pos] != '{' && p.b[p.pos] != '[' {
			if _, err := p.skip(0); err == nil {
				return Invalid(ptr, "must be an object")
			}
		}
		if p.pos < len(p.b) && p.b[p.pos] == '[' {
			return Invalid(ptr, "must be an object, not an array")
		}
		return p.syntax("an object")
	}
	p.pos++
	var seenBuf [16][]byte
	seen := seenBuf[:0]
	p.ws()
	if p.pos < len(p.b) && p.b[p.pos] == '}' {
		p.pos++
		return nil
	}
	for {
		p.ws()
		kb, ok := p.key()
		if !ok {
			return p.syntax("a quoted key")
		}
		if err := p.checkKey(ptr, kb, seen, known); err != nil {
			return err
		}
		if len(seen) < cap(seen) {
			seen = append(seen, kb)
		}
		p.ws()
		if p.pos >= len(p.b) || p.b[p.pos] != ':' {
			return p.syntax("':' after the key")
		}
		p.pos++
		p.ws()
		if err := member(kb); err != nil {
			return err
		}
		p.ws()
		if p.pos >= len(p.b) {
			return p.syntax("',' or '}'")
		}
		switch p.b[p.pos] {
		case ',':
			p.pos++
		case '}':
			p.pos++
			return nil
		default:
			return p.syntax("',' or '}'")
		}
	}
}

// checkKey refuses a repeated key and a key that differs from a known one
// only in case.
func (p *pointParser) checkKey(ptr string, kb []byte, seen [][]byte, known []string) error {
	for _, s := range seen {
		if bytes.Equal(s, kb) {
			k := Truncate(string(kb))
			return Invalid(ptr+"/"+escapePointer(k), fmt.Sprintf("%q appears twice", k))
		}
	}
	for _, c := range kb {
		if c >= 'A' && c <= 'Z' {
			return p.unknownKey(ptr, kb, known)
		}
	}
	return nil
}

// unknownKey is the error for a key that is not a member; a key that
// matches a known one but for case is told so.
func (p *pointParser) unknownKey(ptr string, kb []byte, known []string) error {
	k := Truncate(string(kb))
	at := ptr + "/" + escapePointer(k)
	for _, want := range known {
		if strings.EqualFold(want, string(kb)) {
			return Invalid(at, fmt.Sprintf("unknown field %q: keys are lower case, write %q", k, want))
		}
	}
	return Invalid(at, fmt.Sprintf("unknown field %q (known: %s)", k, strings.Join(known, ", ")))
}

// array reads the array at pos (null reads as empty), calling elem for
// each element; elem must read it. At the element past limit (when limit
// > 0) it stops with a problem of kind k naming ptr, before reading it.
func (p *pointParser) array(ptr string, limit int, k Kind, what string, elem func(i int) error) error {
	if p.null() {
		return nil
	}
	if p.pos >= len(p.b) || p.b[p.pos] != '[' {
		if _, err := p.skip(0); err == nil {
			return Invalid(ptr, "must be an array")
		}
		return p.syntax("an array")
	}
	p.pos++
	p.ws()
	if p.pos < len(p.b) && p.b[p.pos] == ']' {
		p.pos++
		return nil
	}
	for i := 0; ; i++ {
		if limit > 0 && i >= limit {
			return tooMany(ptr, limit, what, k)
		}
		p.ws()
		if err := elem(i); err != nil {
			return err
		}
		p.ws()
		if p.pos >= len(p.b) {
			return p.syntax("',' or ']'")
		}
		switch p.b[p.pos] {
		case ',':
			p.pos++
		case ']':
			p.pos++
			return nil
		default:
			return p.syntax("',' or ']'")
		}
	}
}

// tooMany is the problem for a list longer than its limit.
func tooMany(ptr string, limit int, what string, k Kind) *Problem {
	d := fmt.Sprintf("at most %d %s", limit, what)
	if k == KindTooLarge {
		return NewProblem(k, fmt.Sprintf("the list exceeds this server's limit of %d %s", limit, what), FieldError{Pointer: ptr, Detail: d})
	}
	return NewProblem(k, d, FieldError{Pointer: ptr, Detail: d})
}

// number reads a finite JSON number.
func (p *pointParser) number(ptr string) (float64, error) {
	v, ok, err := p.num()
	if !ok {
		if s, isStr := p.str(); isStr {
			return 0, Invalid(ptr, fmt.Sprintf("must be a JSON number, not the string %q", Truncate(s)))
		}
		if _, err := p.skip(0); err == nil {
			return 0, Invalid(ptr, "must be a number")
		}
		return 0, p.syntax("a number")
	}
	if err != nil {
		return 0, Invalid(ptr, err.Error())
	}
	return v, nil
}

// lazyNumber is number with the pointer formatted only on an error.
func (p *pointParser) lazyNumber(ptr func() string) (float64, error) {
	start := p.pos
	if v, ok, err := p.num(); ok && err == nil {
		return v, nil
	}
	p.pos = start
	return p.number(ptr())
}

// optNumber reads a number or null.
func (p *pointParser) optNumber(ptr string, dst **float64) error {
	if p.null() {
		*dst = nil
		return nil
	}
	v, err := p.number(ptr)
	*dst = &v
	return err
}

// integer reads a JSON integer (no fraction or exponent); unsigned takes
// 0 to 2^64−1, else the int range.
func (p *pointParser) integer(ptr string, unsigned bool) (int64, error) {
	start := p.pos
	j := p.pos
	if j < len(p.b) && p.b[j] == '-' {
		j++
	}
	for j < len(p.b) && p.b[j] >= '0' && p.b[j] <= '9' {
		j++
	}
	tok := string(p.b[start:j])
	want := "an integer"
	if unsigned {
		want = "a non-negative integer"
	}
	if j < len(p.b) && (p.b[j] == '.' || p.b[j] == 'e' || p.b[j] == 'E') || tok == "" || tok == "-" {
		if _, err := p.skip(0); err != nil {
			return 0, p.syntax("a number")
		}
		return 0, Invalid(ptr, fmt.Sprintf("must be %s, not %s", want, Truncate(string(p.b[start:p.pos]))))
	}
	p.pos = j
	if unsigned {
		u, err := strconv.ParseUint(tok, 10, 64)
		if err != nil {
			return 0, Invalid(ptr, fmt.Sprintf("must be %s, not %s", want, Truncate(tok)))
		}
		return int64(u), nil
	}
	v, err := strconv.ParseInt(tok, 10, 0)
	if err != nil {
		return 0, Invalid(ptr, fmt.Sprintf("must be %s, not %s", want, Truncate(tok)))
	}
	return v, nil
}

// text reads a string of at most maxNameBytes (null reads as "" when
// nullable).
func (p *pointParser) text(ptr string, nullable bool) (string, error) {
	if nullable && p.null() {
		return "", nil
	}
	if p.pos < len(p.b) && p.b[p.pos] == '"' {
		s, ok := p.str()
		if !ok {
			return "", p.syntax("a well-formed UTF-8 string")
		}
		return s, nameLength(ptr, s)
	}
	if _, err := p.skip(0); err == nil {
		return "", Invalid(ptr, "must be a string")
	}
	return "", p.syntax("a string")
}

// skip reads over any JSON value, checking its syntax, and returns its
// start.
func (p *pointParser) skip(depth int) (int, error) {
	p.ws()
	start := p.pos
	if p.pos >= len(p.b) {
		return start, p.syntax("a value")
	}
	if depth > maxDepth {
		return start, Invalid(pointerAt(p.b, int64(p.pos)), fmt.Sprintf("values nest deeper than %d levels", maxDepth))
	}
	switch c := p.b[p.pos]; {
	case c == '"':
		if _, ok := p.str(); !ok {
			return start, p.syntax("a well-formed string")
		}
	case c == '{' || c == '[':
		closer := byte('}')
		if c == '[' {
			closer = ']'
		}
		p.pos++
		p.ws()
		if p.pos < len(p.b) && p.b[p.pos] == closer {
			p.pos++
			return start, nil
		}
		for {
			p.ws()
			if c == '{' {
				if _, ok := p.key(); !ok {
					return start, p.syntax("a quoted key")
				}
				p.ws()
				if p.pos >= len(p.b) || p.b[p.pos] != ':' {
					return start, p.syntax("':'")
				}
				p.pos++
			}
			if _, err := p.skip(depth + 1); err != nil {
				return start, err
			}
			p.ws()
			if p.pos >= len(p.b) {
				return start, p.syntax("',' or '" + string(closer) + "'")
			}
			if p.b[p.pos] == ',' {
				p.pos++
				continue
			}
			if p.b[p.pos] == closer {
				p.pos++
				return start, nil
			}
			return start, p.syntax("',' or '" + string(closer) + "'")
		}
	case c == 't' && bytes.HasPrefix(p.b[p.pos:], []byte("true")):
		p.pos += 4
	case c == 'f' && bytes.HasPrefix(p.b[p.pos:], []byte("false")):
		p.pos += 5
	case c == 'n' && bytes.HasPrefix(p.b[p.pos:], []byte("null")):
		p.pos += 4
	default:
		if _, ok, _ := p.num(); !ok {
			return start, p.syntax("a value")
		}
	}
	return start, nil
}

// syntax is the error for malformed JSON at pos. encoding/json's scanner
// names the first fault of the body when it finds one (its offset and
// wording); otherwise the fault is described here.
func (p *pointParser) syntax(want string) error {
	var v struct{}
	var se *json.SyntaxError
	if err := json.Unmarshal(p.b, &v); errors.As(err, &se) {
		detail := fmt.Sprintf("the body is not valid JSON at byte %d (%s)", se.Offset, se.Error())
		if at := se.Offset - 1; at >= 0 && at < int64(len(p.b)) && strings.IndexByte("NIn", p.b[at]) >= 0 {
			detail += "; numbers must be finite JSON numbers, not NaN or Infinity"
		}
		return Invalid(pointerAt(p.b, se.Offset-1), detail)
	}
	return Invalid(pointerAt(p.b, int64(p.pos)), fmt.Sprintf("the body is not valid JSON at byte %d: expected %s", p.pos+1, want))
}

// limitsOf returns the limits a body was read under: the server's for a
// *Body it read, else DefaultLimits.
func limitsOf(r io.Reader) Limits {
	if b, ok := r.(*Body); ok && b.lim != nil {
		return *b.lim
	}
	return DefaultLimits
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
	case *Body:
		return v.take(), nil
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

// prefixedErr moves the pointers of a problem under prefix.
func prefixedErr(err error, prefix string) error {
	var p *Problem
	if errors.As(err, &p) {
		return Prefixed(p, prefix)
	}
	return err
}
