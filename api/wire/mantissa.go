package wire

// Reading a plain mantissa sixteen bytes at a time. mantissa16 (in
// assembly on amd64 with SSSE3, mantissa_amd64.s) reads the mantissa that
// leads sixteen bytes: digits with at most one '.', ended by a byte that
// is neither, within the sixteen. Its lanes test every byte at once, so a
// number's length costs no branches: the first lane that is neither a digit
// nor '.' gives the length, the first '.' before it the point, a shuffle
// from shuffleTable moves the digits (the point left out) to the top of
// sixteen lanes with zeros before them, and two multiply-adds of
// neighbouring lanes give four numbers of four digits each (the method of
// Lemire's fast_float and simdjson). scanFloat takes its answer when it is
// one, and reads every other number one digit at a time as before; the two
// are held together by TestMantissa16 and the number tests.

// shuffleTable holds, for the point at lane p (16: none) and the length L,
// the shuffle that right-aligns the mantissa's digits in sixteen lanes:
// lane k takes the digit that belongs there, or 0 (the mask's high bit)
// for the leading zeros. Row p·16 + L.
var shuffleTable = func() (t [17 * 16][16]byte) {
	for p := 0; p <= 16; p++ {
		for l := 0; l < 16; l++ {
			var digits []byte
			for k := 0; k < l; k++ {
				if k != p {
					digits = append(digits, byte(k))
				}
			}
			row := &t[p*16+l]
			for k := range row {
				row[k] = 0x80
			}
			copy(row[16-len(digits):], digits)
		}
	}
	return t
}()

// mantissaAt is mantissa16 on b[i:] where sixteen bytes remain and the
// processor runs it; length 0 otherwise.
func mantissaAt(b []byte, i int) (lo, hi uint64, length, dot int) {
	if !haveMantissa16 || i < 0 || len(b)-i < 16 {
		return 0, 0, 0, 16
	}
	return mantissa16(&b[i])
}

// mantissaOf is the number mantissa16's four groups of four digits write,
// most significant first.
func mantissaOf(lo, hi uint64) uint64 {
	return ((uint64(uint32(lo))*10000+lo>>32)*10000+uint64(uint32(hi)))*10000 + hi>>32
}
