package wire

import (
	"bytes"
	"encoding/json"
	"fmt"
	"unicode/utf8"

	"eivfit/eiv/study"
)

// Dataset holds paired measurements column-wise, as the estimators take them.
// SX, SY, R and Order are nil when the input states none; ID holds "" for a
// point without an id.
type Dataset struct {
	study.Data

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
	// chunk overrides the size and count of the chunks a large points
	// array is read in (json_chunks.go); zero: the defaults.
	chunk chunkPlan
}

func (p *pointParser) fail(ptr, format string, a ...any) error {
	return Invalid(ptr, fmt.Sprintf(format, a...))
}

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
