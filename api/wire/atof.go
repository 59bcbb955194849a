package wire

import (
	"bytes"
	"encoding/binary"
	"errors"
	"fmt"
	"math"
	"strconv"
)

// pow10 holds the powers of ten that are exact in float64.
var pow10 = [...]float64{1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11,
	1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18, 1e19, 1e20, 1e21, 1e22}

// parseFloat parses a decimal number as a spreadsheet writes it, bit for
// bit as strconv.ParseFloat does: an optional '-', digits with an optional
// '.' fraction, an optional exponent (e or E, optional sign). Go's other
// number syntax (a leading '+', '_' between digits, hexadecimal, Inf, NaN)
// is refused, and so is a nonzero number whose magnitude is below the
// smallest normal double (1e-400 would otherwise read as 0). ok is false
// for a syntax or range error. The work is scanFloat's.
func parseFloat(b []byte) (v float64, ok bool) {
	v, end, ok := scanFloat(b, 0)
	if !ok || end != len(b) {
		return 0, false
	}
	return v, true
}

// scanFloat reads the plain decimal that starts at b[i], stopping at the
// first byte that cannot continue it (end); ok says whether b[i:end] is a
// number parseFloat accepts, and v is its value. A byte the grammar cannot
// take is left to the caller: "1x" reads as 1 up to end = i+1.
//
// Numbers whose digits fit in 2^53 and whose power of ten is at most 22
// (or up to 37 when the digits times the excess power of ten still fit)
// take Clinger's (1990) exact fast path: one correctly rounded IEEE
// multiplication or division of two exact values. Everything else (more
// than 15 significant digits, larger powers of ten) goes to strconv,
// which is exact.
func scanFloat(b []byte, i int) (v float64, end int, ok bool) {
	start, n := i, len(b)
	neg := false
	if i < n && b[i] == '-' {
		neg = true
		i++
	}
	// The digits, up to 19 of them exactly in mant (more wrap around,
	// and such a number takes the slow path): sixteen bytes at once where
	// they remain and hold the whole mantissa (mantissa.go), else one digit
	// at a time.
	var mant uint64
	digits, exp := 0, 0
	if lo, hi, l, p := mantissaAt(b, i); l > 0 {
		mant, digits = mantissaOf(lo, hi), l
		if p < l {
			digits, exp = l-1, p+1-l
		}
		i += l
	} else {
		is := i
		for i < n && b[i]-'0' <= 9 {
			mant = mant*10 + uint64(b[i]-'0')
			i++
		}
		digits = i - is
		if i < n && b[i] == '.' {
			i++
			fs := i
			for i+8 <= n && b[i]-'0' <= 9 {
				d, ok := eightDigits(b[i:])
				if !ok {
					break
				}
				mant = mant*100000000 + d
				i += 8
			}
			for i < n && b[i]-'0' <= 9 {
				mant = mant*10 + uint64(b[i]-'0')
				i++
			}
			digits += i - fs
			exp = fs - i
		}
	}
	slow := digits > 19 || mant >= 1<<53
	if digits == 0 { // "", "-", ".", "Inf", "NaN"
		return 0, i, false
	}
	if i < n && b[i]|0x20 == 'e' {
		i++
		eneg := false
		if i < n && (b[i] == '-' || b[i] == '+') {
			eneg = b[i] == '-'
			i++
		}
		es, e := i, 0
		for ; i < n; i++ {
			c := b[i] - '0'
			if c > 9 {
				break
			}
			if e < 10000 {
				e = e*10 + int(c)
			}
		}
		if i == es {
			return 0, i, false
		}
		if eneg {
			e = -e
		}
		exp += e
	}
	if slow {
		v, ok = slowFloat(b[start:i])
		return v, i, ok
	}
	f := float64(mant)
	switch {
	case exp == 0:
	case exp > 0 && exp <= 22:
		f *= pow10[exp]
	case exp < 0 && exp >= -22:
		f /= pow10[-exp]
	case exp > 22 && exp <= 22+15 && mant <= (1<<53-1)/uint64(pow10[exp-22]):
		// The digits times 10^(exp-22) are still an exact integer.
		f = float64(mant*uint64(pow10[exp-22])) * pow10[22]
	default:
		v, ok = slowFloat(b[start:i])
		return v, i, ok
	}
	if neg {
		f = -f
	}
	return f, i, true
}

// eightDigits reads b[:8] as eight ASCII digits, eight at a time in one
// word (the SWAR method of Lemire's fast_float and simdjson): ok is false
// if any of the bytes is not a digit.
func eightDigits(b []byte) (uint64, bool) {
	v := binary.LittleEndian.Uint64(b)
	if (v&0xF0F0F0F0F0F0F0F0)|((v+0x0606060606060606)&0xF0F0F0F0F0F0F0F0)>>4 != 0x3333333333333333 {
		return 0, false
	}
	v -= 0x3030303030303030
	v = v*10 + v>>8 // pairs of digits in bytes 0, 2, 4, 6
	const mask = 0x000000FF000000FF
	v = ((v&mask)*(100+1000000<<32) + (v>>16&mask)*(1+10000<<32)) >> 32
	return uint64(uint32(v)), true
}

func slowFloat(b []byte) (float64, bool) {
	if !plainDecimal(b) {
		return 0, false
	}
	v, err := strconv.ParseFloat(string(b), 64)
	if err != nil || math.IsInf(v, 0) || math.IsNaN(v) || underflows(b, v) {
		return v, false
	}
	return v, true
}

// plainDecimal reports whether b is -?D*(.D*)?([eE][+-]?D+)? with at
// least one mantissa digit.
func plainDecimal(b []byte) bool {
	i, n := 0, len(b)
	if i < n && b[i] == '-' {
		i++
	}
	digits := 0
	for ; i < n && b[i] >= '0' && b[i] <= '9'; i++ {
		digits++
	}
	if i < n && b[i] == '.' {
		for i++; i < n && b[i] >= '0' && b[i] <= '9'; i++ {
			digits++
		}
	}
	if digits == 0 {
		return false
	}
	if i < n && (b[i] == 'e' || b[i] == 'E') {
		i++
		if i < n && (b[i] == '+' || b[i] == '-') {
			i++
		}
		es := i
		for ; i < n && b[i] >= '0' && b[i] <= '9'; i++ {
		}
		if i == es {
			return false
		}
	}
	return i == n
}

// underflows reports whether v, parsed from b, lost a nonzero value to
// zero or to the subnormal range.
func underflows(b []byte, v float64) bool {
	if math.Abs(v) >= math.SmallestNonzeroFloat64*(1<<52) { // 2^-1022, the smallest normal
		return false
	}
	for _, c := range b {
		if c == 'e' || c == 'E' {
			break
		}
		if c >= '1' && c <= '9' {
			return true
		}
	}
	return false
}

// numberError says why parseFloat refused b.
func numberError(b []byte) error {
	s := Truncate(string(b))
	switch {
	case len(b) == 0:
		return errors.New("the cell is empty; every row needs a number in this column")
	case !plainDecimal(b):
		if bytes.Count(b, []byte{','}) == 1 || bytes.IndexByte(b, ';') >= 0 {
			return fmt.Errorf("%q is not a number (use '.' as the decimal mark and ',' between columns)", s)
		}
		return fmt.Errorf("%q is not a number: write plain decimals such as -12.5 or 1.2E-05 (no '+' sign, '_', hexadecimal, Inf or NaN)", s)
	}
	v, err := strconv.ParseFloat(string(b), 64)
	if err != nil || math.IsInf(v, 0) {
		return fmt.Errorf("%s is outside the double-precision range", s)
	}
	return fmt.Errorf("%s is below the smallest normal double (2.2e-308) and would lose its value", s)
}
