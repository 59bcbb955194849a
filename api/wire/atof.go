package wire

import (
	"bytes"
	"math"
	"strconv"
)

// pow10 holds the powers of ten that are exact in float64.
var pow10 = [...]float64{1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11,
	1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18, 1e19, 1e20, 1e21, 1e22}

// parseFloat parses a decimal number, bit for bit as strconv.ParseFloat
// does. Numbers whose digits fit in 2^53 and whose power of ten is at most
// 22 take Clinger's (1990) exact fast path: one correctly rounded IEEE
// multiplication or division of two exact values. Everything else goes to
// strconv. ok is false for a syntax or range error.
func parseFloat(b []byte) (v float64, ok bool) {
	i, n := 0, len(b)
	neg := false
	if i < n && (b[i] == '-' || b[i] == '+') {
		neg = b[i] == '-'
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
	if bytes.ContainsAny(b, "xX_") { // Go's hexadecimal floats and digit separators are not decimals
		return 0, false
	}
	v, err := strconv.ParseFloat(string(b), 64)
	if err != nil || math.IsInf(v, 0) || math.IsNaN(v) {
		return v, false
	}
	return v, true
}
