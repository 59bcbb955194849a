package wire

import (
	"bytes"
	"encoding/json"
	"fmt"
	"strconv"
	"unicode/utf8"

	"eivfit/eiv/study"
)

// Dataset holds paired measurements column-wise, as the estimators take them.
// SX, SY, R and Order are nil when the input states none; ID holds "" for a
// point without an id.
type Dataset struct {
	study.Data

	// has records which optional columns appeared at each point, so that a
	// column given at some points but not others can be reported.
	hasSX, hasSY, hasR, hasOrder []bool
	// rows maps a point to its CSV line number (1-based; nil for JSON).
	// When the points sit on consecutive lines rows is nil and point i is
	// on line firstRow+i (firstRow > 0).
	rows     []int
	firstRow int
	csv      bool
	// input says how a CSV export was read; xUnit and yUnit are the units
	// its header or units row gave x and y.
	input        *InputOut
	xUnit, yUnit string
}

// Input says how a CSV export was read (nil when there is nothing to say).
func (d *Dataset) Input() *InputOut { return d.input }

// locate returns the pointer for point i's field: a JSON pointer under
// /points, or a CSV row and column.
func (d *Dataset) locate(i int, field string) string {
	return d.source(nil).point(i, field)
}

func (d *Dataset) source(methods []string) *Source {
	if d.csv {
		return &Source{Form: FormCSV, Root: "/points", Rows: d.rows, Methods: methods, firstRow: d.firstRow, points: d.Len()}
	}
	return &Source{Form: FormJSON, Root: "/points", Methods: methods}
}

// UnmarshalJSON decodes the "points" array: [{"x": 1, "y": 2, "sx": 0.1, ...}].
// It is strict: unknown or repeated keys, non-numbers, and values outside
// the double-precision range are errors naming /points/i/key.
func (d *Dataset) UnmarshalJSON(b []byte) error {
	p := pointParser{b: b, d: d}
	return p.parse()
}

type pointParser struct {
	b   []byte
	pos int
	d   *Dataset
	lim Limits // zero fields: no limit
}

func (p *pointParser) ws() {
	for p.pos < len(p.b) {
		switch p.b[p.pos] {
		case ' ', '\t', '\n', '\r':
			p.pos++
		default:
			return
		}
	}
}

func (p *pointParser) fail(ptr, format string, a ...any) error {
	return Invalid(ptr, fmt.Sprintf(format, a...))
}

func (p *pointParser) parse() error {
	p.ws()
	if p.pos < len(p.b) && p.b[p.pos] == 'n' { // null
		return p.fail("/points", "points must be an array of objects, not null")
	}
	if p.pos >= len(p.b) || p.b[p.pos] != '[' {
		return p.fail("/points", "points must be an array of objects")
	}
	p.pos++
	d := p.d
	// One '{' per point: counting them (a fast byte scan) sizes the columns
	// exactly, so they are allocated once.
	hint := bytes.Count(p.b[p.pos:], []byte{'{'})
	if p.lim.MaxPoints > 0 {
		hint = min(hint, p.lim.MaxPoints)
	}
	d.X = make([]float64, 0, hint)
	d.Y = make([]float64, 0, hint)
	p.ws()
	if p.pos < len(p.b) && p.b[p.pos] == ']' {
		p.pos++
		return nil
	}
	for i := 0; ; i++ {
		if p.lim.MaxPoints > 0 && i >= p.lim.MaxPoints {
			return tooMany("/points", p.lim.MaxPoints, "points per dataset", KindTooLarge)
		}
		p.ws()
		if err := p.point(i); err != nil {
			return err
		}
		p.ws()
		if p.pos >= len(p.b) {
			return p.fail("/points", "unexpected end of the points array")
		}
		switch p.b[p.pos] {
		case ',':
			p.pos++
		case ']':
			p.pos++
			return d.finish()
		default:
			return p.fail(fmt.Sprintf("/points/%d", i), "expected ',' or ']' after a point")
		}
	}
}

// pointKeys are the members of a point.
var pointKeys = []string{"x", "y", "sx", "sy", "r", "id", "order"}

const (
	fX = 1 << iota
	fY
	fSX
	fSY
	fR
	fOrder
	fID
)

func (p *pointParser) point(i int) error {
	ptr := lazyPtr(i) // built only on an error: no allocation per point
	if p.pos >= len(p.b) || p.b[p.pos] != '{' {
		return p.fail(ptr.s(), "each point must be an object such as {\"x\": 1.2, \"y\": 1.3}")
	}
	p.pos++
	var seen int
	var x, y, sx, sy, r, order float64
	var id string
	p.ws()
	if p.pos < len(p.b) && p.b[p.pos] == '}' {
		p.pos++
	} else {
		for {
			p.ws()
			kb, ok := p.key()
			if !ok {
				return p.fail(ptr.s(), "expected a quoted key")
			}
			p.ws()
			if p.pos >= len(p.b) || p.b[p.pos] != ':' {
				return p.fail(ptr.s()+"/"+escapePointer(string(kb)), "expected ':' after the key")
			}
			p.pos++
			p.ws()
			var bit int
			var dst *float64
			var key string
			switch string(kb) { // compiled without allocating
			case "x":
				key = "x"
			case "y":
				key = "y"
			case "sx":
				key = "sx"
			case "sy":
				key = "sy"
			case "r":
				key = "r"
			case "order":
				key = "order"
			case "id":
				key = "id"
			default:
				key = string(kb)
			}
			switch key {
			case "x":
				bit, dst = fX, &x
			case "y":
				bit, dst = fY, &y
			case "sx":
				bit, dst = fSX, &sx
			case "sy":
				bit, dst = fSY, &sy
			case "r":
				bit, dst = fR, &r
			case "order":
				bit, dst = fOrder, &order
			case "id":
				bit = fID
			default:
				return p.unknownKey(ptr.s(), kb, pointKeys)
			}
			fptr := fieldPtr{ptr, key}
			if seen&bit != 0 {
				return p.fail(fptr.s(), "%q appears twice", key)
			}
			if p.null() {
				if bit == fX || bit == fY {
					return p.fail(fptr.s(), "%s is required and must be a number", key)
				}
			} else if bit == fID {
				seen |= bit
				if s, ok := p.str(); ok {
					if len(s) > maxNameBytes {
						return p.fail(fptr.s(), "an id has at most %d bytes, not %d", maxNameBytes, len(s))
					}
					id = s
				} else if v, ok, err := p.num(); ok {
					if err != nil {
						return p.fail(fptr.s(), "%v", err)
					}
					id = strconv.FormatFloat(v, 'g', -1, 64)
				} else {
					return p.fail(fptr.s(), "id must be a string or a number")
				}
			} else {
				seen |= bit
				v, ok, err := p.num()
				if !ok {
					if s, isStr := p.str(); isStr {
						return p.fail(fptr.s(), "%s must be a JSON number, not the string %q", key, Truncate(s))
					}
					return p.fail(fptr.s(), "%s must be a number", key)
				}
				if err != nil {
					return p.fail(fptr.s(), "%s: %v", key, err)
				}
				*dst = v
			}
			p.ws()
			if p.pos >= len(p.b) {
				return p.fail(ptr.s(), "unexpected end inside a point")
			}
			if p.b[p.pos] == ',' {
				p.pos++
				continue
			}
			if p.b[p.pos] == '}' {
				p.pos++
				break
			}
			return p.fail(ptr.s(), "expected ',' or '}' in a point")
		}
	}
	if seen&fX == 0 {
		return p.fail(ptr.s()+"/x", "x is required")
	}
	if seen&fY == 0 {
		return p.fail(ptr.s()+"/y", "y is required")
	}
	p.d.add(i, x, y, sx, sy, r, order, id, seen)
	return nil
}

// add appends one point; optional columns are created on first use.
func (d *Dataset) add(i int, x, y, sx, sy, r, order float64, id string, seen int) {
	d.X = append(d.X, x)
	d.Y = append(d.Y, y)
	opt := func(col *[]float64, has *[]bool, bit int, v float64) {
		if seen&bit != 0 && *col == nil {
			*col = make([]float64, i, cap(d.X))
			*has = make([]bool, i, cap(d.X))
		}
		if *col != nil {
			*col = append(*col, v)
			*has = append(*has, seen&bit != 0)
		}
	}
	opt(&d.SX, &d.hasSX, fSX, sx)
	opt(&d.SY, &d.hasSY, fSY, sy)
	opt(&d.R, &d.hasR, fR, r)
	opt(&d.Order, &d.hasOrder, fOrder, order)
	if id != "" && d.ID == nil {
		d.ID = make([]string, i, cap(d.X))
	}
	if d.ID != nil {
		d.ID = append(d.ID, id)
	}
}

// finish checks that an optional column is given at every point or at none.
func (d *Dataset) finish() error {
	for _, c := range []struct {
		name string
		has  []bool
	}{{"sx", d.hasSX}, {"sy", d.hasSY}, {"r", d.hasR}, {"order", d.hasOrder}} {
		for i, h := range c.has {
			if !h {
				return Invalid(d.locate(i, c.name), fmt.Sprintf(
					"%s is given at some points but missing here: give it at every point or at none", c.name))
			}
		}
	}
	if d.R != nil && (d.SX == nil || d.SY == nil) {
		return Invalid(d.locate(0, "r"), "r (error correlation) needs sx and sy")
	}
	d.hasSX, d.hasSY, d.hasR, d.hasOrder = nil, nil, nil, nil
	return nil
}

// lazyPtr is the pointer /points/i, formatted only when needed.
type lazyPtr int

func (l lazyPtr) s() string { return fmt.Sprintf("/points/%d", int(l)) }

type fieldPtr struct {
	p   lazyPtr
	key string
}

func (f fieldPtr) s() string { return f.p.s() + "/" + f.key }

// key reads a quoted key without allocating when it has no escapes.
func (p *pointParser) key() ([]byte, bool) {
	if p.pos >= len(p.b) || p.b[p.pos] != '"' {
		return nil, false
	}
	for j := p.pos + 1; j < len(p.b); j++ {
		switch c := p.b[j]; {
		case c == '\\':
			s, ok := p.str()
			return []byte(s), ok
		case c == '"':
			k := p.b[p.pos+1 : j]
			p.pos = j + 1
			return k, true
		case c < 0x20:
			return nil, false
		}
	}
	return nil, false
}

func (p *pointParser) null() bool {
	if bytes.HasPrefix(p.b[p.pos:], []byte("null")) {
		p.pos += 4
		return true
	}
	return false
}

// str reads a JSON string at pos. It reports false, consuming nothing, when
// no well-formed string is there.
func (p *pointParser) str() (string, bool) {
	if p.pos >= len(p.b) || p.b[p.pos] != '"' {
		return "", false
	}
	start := p.pos
	esc := false
	for j := p.pos + 1; j < len(p.b); j++ {
		switch c := p.b[j]; {
		case c == '\\':
			esc = true
			j++
		case c == '"':
			raw := p.b[start : j+1]
			if !esc {
				if !utf8.Valid(raw) {
					return "", false
				}
				p.pos = j + 1
				return string(raw[1 : len(raw)-1]), true
			}
			var s string
			if json.Unmarshal(raw, &s) != nil {
				return "", false
			}
			p.pos = j + 1
			return s, true
		case c < 0x20:
			return "", false
		}
	}
	return "", false
}

// num reads a JSON number at pos. ok is false, consuming nothing, when there
// is no number; err is set for a number outside the double range.
func (p *pointParser) num() (v float64, ok bool, err error) {
	j := p.pos
	b := p.b
	if j < len(b) && b[j] == '-' {
		j++
	}
	digits := func() int {
		k := j
		for j < len(b) && b[j] >= '0' && b[j] <= '9' {
			j++
		}
		return j - k
	}
	if j >= len(b) {
		return 0, false, nil
	}
	if b[j] == '0' {
		j++
	} else if digits() == 0 {
		return 0, false, nil
	}
	if j < len(b) && b[j] == '.' {
		j++
		if digits() == 0 {
			return 0, false, nil
		}
	}
	if j < len(b) && (b[j] == 'e' || b[j] == 'E') {
		j++
		if j < len(b) && (b[j] == '+' || b[j] == '-') {
			j++
		}
		if digits() == 0 {
			return 0, false, nil
		}
	}
	s := b[p.pos:j]
	p.pos = j
	v, ok = parseFloat(s)
	if !ok {
		return 0, true, numberError(s)
	}
	return v, true, nil
}

// maxEcho bounds the bytes of client text echoed in a problem.
const maxEcho = 64

// Truncate shortens client text echoed in a problem to maxEcho bytes (at a
// character boundary), marking the cut.
func Truncate(s string) string {
	if len(s) <= maxEcho {
		return s
	}
	cut := maxEcho - 3
	for cut > 0 && !utf8.RuneStart(s[cut]) {
		cut--
	}
	return s[:cut] + "..."
}

// escapePointer escapes a key for use in an RFC 6901 pointer.
func escapePointer(k string) string {
	var b []byte
	for i := 0; i < len(k); i++ {
		switch k[i] {
		case '~':
			b = append(b, "~0"...)
		case '/':
			b = append(b, "~1"...)
		default:
			b = append(b, k[i])
		}
	}
	return string(b)
}
