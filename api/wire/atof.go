package wire

import (
	"bytes"
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
// smallest normal double (1e-400 would otherwise read as 0). Numbers whose digits fit in 2^53 and whose power of ten is at most
// 22 take Clinger's (1990) exact fast path: one correctly rounded IEEE
// multiplication or division of two exact values. Everything else goes to
// strconv. ok is false for a syntax or range error.
func parseFloat(b []byte) (v float64, ok bool) {
	i, n := 0, len(b)
	neg := false
	if i < n && b[i] == '-' {
		neg = true
		i++
	}
	var mant uint64
	digits, exp := 0, 0
	start := i
	for ; i < n && b[i] >= '0' && b[i] <= '9'; i++ {
		if mant < 1<<53/10 || digits == 0 {
			mant = mant*10 + uint64(b[i]-'0')
			if mant != 0 {
				digits++
			}
		} else {
			return slowFloat(b)
		}
	}
	intDigits := i - start
	if i < n && b[i] == '.' {
		i++
		fs := i
		for ; i < n && b[i] >= '0' && b[i] <= '9'; i++ {
			if mant < 1<<53/10 || mant == 0 {
				mant = mant*10 + uint64(b[i]-'0')
				exp--
			} else {
				return slowFloat(b)
			}
		}
		if i == fs && intDigits == 0 {
			return 0, false
		}
	} else if intDigits == 0 {
		return slowFloat(b) // "Inf", "NaN", ".5" and the like
	}
	if i < n && (b[i] == 'e' || b[i] == 'E') {
		i++
		eneg := false
		if i < n && (b[i] == '-' || b[i] == '+') {
			eneg = b[i] == '-'
			i++
		}
		es, e := i, 0
		for ; i < n && b[i] >= '0' && b[i] <= '9'; i++ {
			if e < 10000 {
				e = e*10 + int(b[i]-'0')
			}
		}
		if i == es {
			return 0, false
		}
		if eneg {
			e = -e
		}
		exp += e
	}
	if i != n || mant >= 1<<53 {
		return slowFloat(b)
	}
	f := float64(mant)
	switch {
	case exp == 0:
	case exp > 0 && exp <= 22:
		f *= pow10[exp]
	case exp < 0 && exp >= -22:
		f /= pow10[-exp]
	default:
		return slowFloat(b)
	}
	if neg {
		f = -f
	}
	return f, true
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
