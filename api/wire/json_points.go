package wire

import (
	"bytes"
	"fmt"
	"math/bits"
	"strconv"
)

// The points array is most of a large JSON body, so its reader is written
// for speed: known keys are matched by their bytes, whitespace by a table,
// plain numbers converted in the pass that scans them (jsonNumber), the
// columns sized once from a count of '{' (one per point), and a large
// array read in chunks on every core (json_chunks.go).

// isSpace marks the four JSON whitespace bytes.
var isSpace = [256]bool{' ': true, '\t': true, '\n': true, '\r': true}

func (p *pointParser) ws() {
	for p.pos < len(p.b) && isSpace[p.b[p.pos]] {
		p.pos++
	}
}

// pointKeys are the members of a point.
var pointKeys = []string{"x", "y", "sx", "sy", "r", "id", "order"}

// The members of a point as bits; sx, sy, r and order are the optional
// columns, in this order (fSX << k for column k).
const (
	fX = 1 << iota
	fY
	fSX
	fSY
	fR
	fOrder
	fID
)

// optNames are the optional columns, in the order of their bits.
var optNames = [4]string{"sx", "sy", "r", "order"}

// pointCols gathers the columns of a points array as it is read.
type pointCols struct {
	x, y []float64
	opt  [4][]float64 // sx, sy, r, order: nil until a point gives one
	// miss is the first point without optional column k once the column
	// exists (0 when it began after point 0), -1 while none is missing.
	miss [4]int
	id   []string
	some bool // an optional column or an id has been given
	// shared holds the optional columns when the array is read in chunks
	// (json_chunks.go); this one's slots start at off.
	shared *sharedCols
	off    int
}

// newColumn is optional column k, created at point i with zeros before it.
func (c *pointCols) newColumn(k, i int) []float64 {
	if c.shared == nil {
		return make([]float64, i, cap(c.x))
	}
	return c.shared.column(k)[c.off : c.off+i : c.off+cap(c.x)]
}

func newPointCols(hint int) *pointCols {
	return &pointCols{x: make([]float64, 0, hint), y: make([]float64, 0, hint), miss: [4]int{-1, -1, -1, -1}}
}

// add appends point i; v holds x, y, sx, sy, r, order and seen the
// members given. An optional column is created at the first point that
// gives it.
func (c *pointCols) add(i int, v *[6]float64, id string, seen int) {
	c.x = append(c.x, v[0])
	c.y = append(c.y, v[1])
	if seen&^(fX|fY) != 0 || c.some {
		c.some = true
		c.addOptional(i, v, id, seen)
	}
}

func (c *pointCols) addOptional(i int, v *[6]float64, id string, seen int) {
	for k := range c.opt {
		given := seen&(fSX<<k) != 0
		switch {
		case c.opt[k] != nil:
			if !given && c.miss[k] < 0 {
				c.miss[k] = i
			}
		case !given:
			continue
		default:
			c.opt[k] = c.newColumn(k, i)
			if i > 0 {
				c.miss[k] = 0
			}
		}
		c.opt[k] = append(c.opt[k], v[2+k])
	}
	if id != "" && c.id == nil {
		if c.shared == nil {
			c.id = make([]string, i, cap(c.x))
		} else {
			c.id = c.shared.ids()[c.off : c.off+i : c.off+cap(c.x)]
		}
	}
	if c.id != nil {
		c.id = append(c.id, id)
	}
}

// into moves the columns into d and checks that an optional column is
// given at every point or at none.
func (c *pointCols) into(d *Dataset) error {
	d.X, d.Y = c.x, c.y
	for k, dst := range [4]*[]float64{&d.SX, &d.SY, &d.R, &d.Order} {
		if c.opt[k] != nil {
			*dst = c.opt[k]
		}
	}
	if c.id != nil {
		d.ID = c.id
	}
	for k, i := range c.miss {
		if i >= 0 {
			return Invalid(d.locate(i, optNames[k]), fmt.Sprintf(
				"%s is given at some points but missing here: give it at every point or at none", optNames[k]))
		}
	}
	if d.R != nil && (d.SX == nil || d.SY == nil) {
		return Invalid(d.locate(0, "r"), "r (error correlation) needs sx and sy")
	}
	return nil
}

// parse reads the points array at pos into p.d.
func (p *pointParser) parse() error {
	p.ws()
	if p.pos < len(p.b) && p.b[p.pos] == 'n' { // null
		return p.fail("/points", "points must be an array of objects, not null")
	}
	if p.pos >= len(p.b) || p.b[p.pos] != '[' {
		return p.fail("/points", "points must be an array of objects")
	}
	p.pos++
	p.ws()
	if p.pos < len(p.b) && p.b[p.pos] == ']' {
		p.pos++
		p.d.X, p.d.Y = []float64{}, []float64{}
		return nil
	}
	if done, err := p.parseChunks(); done {
		return err
	}
	// One '{' per point: counting them (a fast byte scan) sizes the columns
	// exactly, so they are allocated once.
	hint := bytes.Count(p.b[p.pos:], []byte{'{'})
	if p.lim.MaxPoints > 0 {
		hint = min(hint, p.lim.MaxPoints)
	}
	c := newPointCols(hint)
	for i := 0; ; i++ {
		if p.lim.MaxPoints > 0 && i >= p.lim.MaxPoints {
			return tooMany("/points", p.lim.MaxPoints, "points per dataset", KindTooLarge)
		}
		p.ws()
		if err := p.point(i, c); err != nil {
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
			return c.into(p.d)
		default:
			return p.fail(fmt.Sprintf("/points/%d", i), "expected ',' or ']' after a point")
		}
	}
}

// pointKey reads the key at pos. A known key written plainly is matched
// by its bytes; anything else (escapes, unknown keys) is read by key.
// bit is 0 for an unknown key; kb is the key as read.
func (p *pointParser) pointKey() (bit int, kb []byte, ok bool) {
	b, j := p.b, p.pos
	if j+2 < len(b) && b[j] == '"' {
		switch {
		case b[j+2] == '"':
			switch b[j+1] {
			case 'x':
				bit = fX
			case 'y':
				bit = fY
			case 'r':
				bit = fR
			}
		case j+3 < len(b) && b[j+3] == '"':
			switch {
			case b[j+1] == 's' && b[j+2] == 'x':
				bit = fSX
			case b[j+1] == 's' && b[j+2] == 'y':
				bit = fSY
			case b[j+1] == 'i' && b[j+2] == 'd':
				bit = fID
			}
		}
		if bit != 0 {
			kb = b[j+1 : j+1+len(keyName(bit))]
			p.pos = j + 2 + len(kb)
			return bit, kb, true
		}
	}
	kb, ok = p.key()
	if !ok {
		return 0, nil, false
	}
	switch string(kb) { // compiled without allocating
	case "x":
		bit = fX
	case "y":
		bit = fY
	case "sx":
		bit = fSX
	case "sy":
		bit = fSY
	case "r":
		bit = fR
	case "order":
		bit = fOrder
	case "id":
		bit = fID
	}
	return bit, kb, true
}

// keyName is the member name of a bit.
func keyName(bit int) string {
	switch bit {
	case fX:
		return "x"
	case fY:
		return "y"
	case fSX:
		return "sx"
	case fSY:
		return "sy"
	case fR:
		return "r"
	case fOrder:
		return "order"
	}
	return "id"
}

// point reads point i at pos and appends it to c.
func (p *pointParser) point(i int, c *pointCols) error {
	ptr := lazyPtr(i) // built only on an error: no allocation per point
	if p.pos >= len(p.b) || p.b[p.pos] != '{' {
		return p.fail(ptr.s(), "each point must be an object such as {\"x\": 1.2, \"y\": 1.3}")
	}
	p.pos++
	var seen int
	var v [6]float64 // x, y, sx, sy, r, order
	var id string
	p.ws()
	if p.pos < len(p.b) && p.b[p.pos] == '}' {
		p.pos++
	} else {
		for {
			p.ws()
			bit, kb, ok := p.pointKey()
			if !ok {
				return p.fail(ptr.s(), "expected a quoted key")
			}
			p.ws()
			if p.pos >= len(p.b) || p.b[p.pos] != ':' {
				return p.fail(ptr.s()+"/"+escapePointer(string(kb)), "expected ':' after the key")
			}
			p.pos++
			p.ws()
			if bit == 0 {
				return p.unknownKey(ptr.s(), kb, pointKeys)
			}
			if x, end, ok := jsonNumber(p.b, p.pos); bit != fID && seen&bit == 0 && end >= 0 && ok {
				v[bits.TrailingZeros(uint(bit))] = x // the common case, as pointValue reads it
				p.pos = end
				seen |= bit
			} else if given, err := p.pointValue(ptr, bit, seen, &v, &id); err != nil {
				return err
			} else if given {
				seen |= bit
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
	c.add(i, &v, id, seen)
	return nil
}

// pointValue reads the value of member bit of point ptr into v or id;
// given is false for a null, which leaves an optional member out.
func (p *pointParser) pointValue(ptr lazyPtr, bit, seen int, v *[6]float64, id *string) (given bool, err error) {
	if seen&bit != 0 {
		return false, p.fail(ptr.field(bit), "%q appears twice", keyName(bit))
	}
	if bit != fID { // a number: the common case first
		if x, ok, err := p.num(); ok {
			if err != nil {
				return false, p.fail(ptr.field(bit), "%s: %v", keyName(bit), err)
			}
			v[bits.TrailingZeros(uint(bit))] = x
			return true, nil
		}
	}
	if p.null() {
		if bit == fX || bit == fY {
			return false, p.fail(ptr.field(bit), "%s is required and must be a number", keyName(bit))
		}
		return false, nil
	}
	if bit == fID {
		if s, ok := p.str(); ok {
			if len(s) > maxNameBytes {
				return false, p.fail(ptr.field(bit), "an id has at most %d bytes, not %d", maxNameBytes, len(s))
			}
			*id = s
		} else if x, ok, err := p.num(); ok {
			if err != nil {
				return false, p.fail(ptr.field(bit), "%v", err)
			}
			*id = strconv.FormatFloat(x, 'g', -1, 64)
		} else {
			return false, p.fail(ptr.field(bit), "id must be a string or a number")
		}
		return true, nil
	}
	if s, isStr := p.str(); isStr {
		return false, p.fail(ptr.field(bit), "%s must be a JSON number, not the string %q", keyName(bit), Truncate(s))
	}
	return false, p.fail(ptr.field(bit), "%s must be a number", keyName(bit))
}

// lazyPtr is the pointer /points/i, formatted only when needed.
type lazyPtr int

func (l lazyPtr) s() string { return fmt.Sprintf("/points/%d", int(l)) }

// field is the pointer of member bit of the point.
func (l lazyPtr) field(bit int) string { return l.s() + "/" + keyName(bit) }

// numberEnd returns the end of the JSON number at b[j:], or -1 when none
// starts there. A leading zero ends the integer part ("01" is "0", then
// "1" that the caller refuses).
func numberEnd(b []byte, j int) int {
	n := len(b)
	if j < n && b[j] == '-' {
		j++
	}
	if j >= n {
		return -1
	}
	if b[j] == '0' {
		j++
	} else if j = digitsEnd(b, j); j < 0 {
		return -1
	}
	if j < n && b[j] == '.' {
		if j = digitsEnd(b, j+1); j < 0 {
			return -1
		}
	}
	if j < n && b[j]|0x20 == 'e' {
		j++
		if j < n && (b[j] == '+' || b[j] == '-') {
			j++
		}
		j = digitsEnd(b, j)
	}
	return j
}

// digitsEnd returns the end of the digits at b[j:], or -1 when there are
// none.
func digitsEnd(b []byte, j int) int {
	k := j
	for j < len(b) && b[j]-'0' < 10 {
		j++
	}
	if j == k {
		return -1
	}
	return j
}

// num reads a JSON number at pos. ok is false, consuming nothing, when there
// is no number; err is set for a number outside the double range.
func (p *pointParser) num() (v float64, ok bool, err error) {
	start := p.pos
	v, end, inRange := jsonNumber(p.b, start)
	if end < 0 {
		return 0, false, nil
	}
	p.pos = end
	if !inRange {
		return 0, true, numberError(p.b[start:end])
	}
	return v, true, nil
}

// jsonNumber reads the JSON number at b[j:] in one pass when it is plain:
// at most 19 digits, a value below 2^53 before the point is placed, at
// most 22 after the point, no exponent. Then it is Clinger's (1990) exact
// case: an exact integer divided by an exact power of ten, one correctly
// rounded IEEE division, so the value is parseFloat's bit for bit. Any
// other number is delimited by numberEnd and read by parseFloat. end is
// -1 when no number starts at j; ok is false for a number outside the
// double range.
func jsonNumber(b []byte, j int) (v float64, end int, ok bool) {
	i, n := j, len(b)
	neg := i < n && b[i] == '-'
	if neg {
		i++
	}
	k := i
	if lo, hi, l, p := mantissaAt(b, i); l > 0 {
		// Sixteen bytes at once (mantissa.go): taken when the mantissa
		// is JSON's (a digit before the point, no leading zero, a digit
		// after it) and no exponent follows.
		intDigits, frac := min(p, l), max(l-p-1, 0)
		if intDigits > 0 && (intDigits == 1 || b[k] != '0') && (p >= l || frac > 0) && (k+l >= n || b[k+l]|0x20 != 'e') {
			v = float64(mantissaOf(lo, hi))
			if frac > 0 {
				v /= pow10[frac]
			}
			if neg {
				v = -v
			}
			return v, k + l, true
		}
	}
	var mant uint64
	for ; i < n && b[i]-'0' < 10; i++ { // most integer parts are short
		mant = mant*10 + uint64(b[i]-'0')
	}
	intDigits := i - k
	frac, dot := 0, i < n && b[i] == '.'
	if dot {
		i++
		f := i
		if i+8 <= n { // eight digits at once, then one at a time
			if d, ok := eightDigits(b[i:]); ok {
				mant = mant*100000000 + d
				i += 8
			}
		}
		for ; i < n && b[i]-'0' < 10; i++ {
			mant = mant*10 + uint64(b[i]-'0')
		}
		frac = i - f
	}
	plain := intDigits > 0 && (intDigits == 1 || b[k] != '0') && // no leading zero
		(!dot || frac > 0) && intDigits+frac <= 19 && mant < 1<<53 && frac <= 22 &&
		(i >= n || b[i]|0x20 != 'e')
	if !plain {
		end = numberEnd(b, j)
		if end < 0 {
			return 0, -1, false
		}
		v, ok = parseFloat(b[j:end])
		return v, end, ok
	}
	v = float64(mant)
	if frac > 0 {
		v /= pow10[frac]
	}
	if neg {
		v = -v
	}
	return v, i, true
}
