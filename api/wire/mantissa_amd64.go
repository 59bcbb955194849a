package wire

import "golang.org/x/sys/cpu"

// haveMantissa16 says whether mantissa16 runs here: it needs SSSE3's byte
// shuffle and multiply-add, which every x86-64 processor of the last
// fifteen years has.
var haveMantissa16 = cpu.X86.HasSSSE3

// mantissa16 reads the mantissa that leads the sixteen bytes at p (which
// must all be readable): length, its bytes (0 when there is no such
// mantissa: no digit, a second '.', or no end within the sixteen bytes);
// dot, the lane of its '.' (16: none); lo and hi, its digits as four
// groups of four (mantissaOf). The caller takes a length of 1 to 15.
//
//go:noescape
func mantissa16(p *byte) (lo, hi uint64, length, dot int)
