//go:build !amd64

package wire

// haveMantissa16 is false off amd64: numbers are read a digit at a time.
var haveMantissa16 = false

func mantissa16(p *byte) (lo, hi uint64, length, dot int) { return 0, 0, 0, 16 }
