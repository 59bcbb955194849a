#include "textflag.h"

// func mantissa16(p *byte) (lo, hi uint64, length, dot int)
TEXT ·mantissa16(SB), NOSPLIT, $0-40
	MOVQ   p+0(FP), SI
	MOVOU  (SI), X0
	MOVOU  X0, X4
	MOVOU  zeros<>(SB), X1
	PSUBB  X1, X0              // each byte less '0': a digit is its value
	MOVOU  X0, X2
	MOVOU  nines<>(SB), X3
	PMINUB X3, X2
	PCMPEQB X0, X2             // lanes ≤ 9: digits
	PMOVMSKB X2, AX
	MOVOU  dots<>(SB), X5
	PCMPEQB X5, X4             // lanes holding '.'
	PMOVMSKB X4, BX
	MOVL   AX, DX
	ORL    BX, DX
	NOTL   DX
	ANDL   $0xFFFF, DX         // lanes holding anything else
	JZ     none
	BSFL   DX, CX              // the length L: the first such lane
	MOVL   $1, R8
	SHLL   CX, R8
	DECL   R8                  // lanes below L
	ANDL   R8, BX              // the '.'s of the mantissa
	MOVQ   $16, R9             // its point (16: none)
	TESTL  BX, BX
	JZ     nodot
	LEAL   -1(BX), R10
	TESTL  R10, BX
	JNZ    none                // a second '.'
	BSFL   BX, R9
	MOVL   CX, R10
	DECL   R10                 // the digits: L less the point
	JMP    digits
nodot:
	MOVL   CX, R10
digits:
	TESTL  R10, R10
	JZ     none                // no digit
	MOVQ   R9, R11
	SHLQ   $4, R11
	ADDQ   CX, R11
	SHLQ   $4, R11             // (p·16 + L)·16 bytes into shuffleTable
	LEAQ   ·shuffleTable(SB), R12
	MOVOU  (R12)(R11*1), X6
	PSHUFB X6, X0              // the digits right-aligned, zeros before
	MOVOU  tens<>(SB), X7
	PMADDUBSW X7, X0           // pairs: 10·a + b
	MOVOU  hundreds<>(SB), X8
	PMADDWL X8, X0             // fours: 100·ab + cd
	MOVQ   X0, AX
	PSRLDQ $8, X0
	MOVQ   X0, BX
	MOVQ   AX, lo+8(FP)
	MOVQ   BX, hi+16(FP)
	MOVQ   CX, length+24(FP)
	MOVQ   R9, dot+32(FP)
	RET
none:
	MOVQ   $0, lo+8(FP)
	MOVQ   $0, hi+16(FP)
	MOVQ   $0, length+24(FP)
	MOVQ   $16, dot+32(FP)
	RET

DATA zeros<>+0(SB)/8, $0x3030303030303030
DATA zeros<>+8(SB)/8, $0x3030303030303030
GLOBL zeros<>(SB), RODATA|NOPTR, $16

DATA nines<>+0(SB)/8, $0x0909090909090909
DATA nines<>+8(SB)/8, $0x0909090909090909
GLOBL nines<>(SB), RODATA|NOPTR, $16

DATA dots<>+0(SB)/8, $0x2e2e2e2e2e2e2e2e
DATA dots<>+8(SB)/8, $0x2e2e2e2e2e2e2e2e
GLOBL dots<>(SB), RODATA|NOPTR, $16

// Bytes 10, 1, 10, 1, …: the first of a pair is the more significant.
DATA tens<>+0(SB)/8, $0x010a010a010a010a
DATA tens<>+8(SB)/8, $0x010a010a010a010a
GLOBL tens<>(SB), RODATA|NOPTR, $16

// Words 100, 1, 100, 1, ….
DATA hundreds<>+0(SB)/8, $0x0001006400010064
DATA hundreds<>+8(SB)/8, $0x0001006400010064
GLOBL hundreds<>(SB), RODATA|NOPTR, $16
