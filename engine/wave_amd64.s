// waveKernel (declared in wave_amd64.go): a batch of wave3 for binary broods, the same
// steps as the loop in wave.go. Each floating-point step is the same single IEEE
// operation on the same operands, so the records are the same bits
// (TestWaveMatchesNode, TestWaveKernelMatchesLoop).
//
// Registers: SI the brood, DI the number of its first child, R8 the next brood to
// push, R9 the next leaf, R11 and R12 the exponential's and the normal's ziggurat
// strips (zigE, zigN), R13 and R14 mix64's multipliers; AX and BX a child's key, CX,
// DX and R10 scratch. X0 the brood's birth time, X1-X3 the child's position, X4 the
// horizon, X5 the rate, X6 sigma, X7 the last checkpoint time, X8 the death, X9 the
// time moved, X10 its standard deviation.

#include "go_asm.h"
#include "textflag.h"

// MIX2 applies the SplitMix64 finaliser (mix64) to AX and BX side by side, with CX
// and DX as scratch.
#define MIX2 \
	MOVQ AX, CX; SHRQ $30, CX; XORQ CX, AX; \
	MOVQ BX, DX; SHRQ $30, DX; XORQ DX, BX; \
	IMULQ R13, AX; IMULQ R13, BX; \
	MOVQ AX, CX; SHRQ $27, CX; XORQ CX, AX; \
	MOVQ BX, DX; SHRQ $27, DX; XORQ DX, BX; \
	IMULQ R14, AX; IMULQ R14, BX; \
	MOVQ AX, CX; SHRQ $31, CX; XORQ CX, AX; \
	MOVQ BX, DX; SHRQ $31, DX; XORQ DX, BX

// MIX1 is mix64 of AX alone.
#define MIX1 \
	MOVQ AX, CX; SHRQ $30, CX; XORQ CX, AX; IMULQ R13, AX; \
	MOVQ AX, CX; SHRQ $27, CX; XORQ CX, AX; IMULQ R14, AX; \
	MOVQ AX, CX; SHRQ $31, CX; XORQ CX, AX

// NORMAL draws the normal of the word in CX by the ziggurat's fast path (zigNormal)
// and adds sd (X10) times it to POS; a draw that does not stand jumps to SLOW. Uses
// DX, R10 and X11.
#define NORMAL(POS, SLOW) \
	MOVQ CX, DX; SHRQ $32, DX; ANDL $0x7f, DX; SHLQ $4, DX; \
	MOVLQSX CX, CX; \
	MOVL 8(R12)(DX*1), R10; ADDQ CX, R10; JMI SLOW; \
	CMPL R10, 12(R12)(DX*1); JCC SLOW; \
	XORPS X11, X11; CVTSL2SD CX, X11; MULSD 0(R12)(DX*1), X11; \
	MULSD X10, X11; ADDSD X11, POS

// CHILD walks child n of the brood at SI one step, n*childGammaHi and n*childGammaLo
// being GHI and GLO: its key (childOf), lifetime and position; then it is written as a
// leaf or a brood (both are written, and the leaf test moves one pointer). A child the
// fast paths cannot take jumps to SLOW. DIV, LIVED, D2, D3 and PLACE are labels of its
// own.
#define CHILD(GHI, GLO, SLOW, DIV, LIVED, D2, PLACE) \
	MOVQ brood_a(SI), AX; MOVQ $GHI, DX; ADDQ DX, AX; \
	MOVQ brood_b(SI), BX; MOVQ $GLO, DX; ADDQ DX, BX; \
	MIX2; \
	MOVQ BX, CX; ROLQ $32, CX; XORQ AX, CX; MOVQ CX, brood_a(R8); \
	MOVQ AX, DX; ROLQ $23, DX; XORQ BX, DX; MOVQ DX, brood_b(R8); \
	MOVQ AX, DX; SHRQ $32, DX; MOVBQZX DL, DX; SHLQ $4, DX; \
	MOVL AX, CX; CMPL CX, 12(R11)(DX*1); JCC SLOW; \
	XORPS X8, X8; CVTSQ2SD CX, X8; MULSD 0(R11)(DX*1), X8; \
	CMPQ div-24(SP), $0; JNE DIV; MULSD X5, X8; JMP LIVED; \
DIV: DIVSD X5, X8; \
LIVED: ADDSD X0, X8; MOVSD X8, brood_birth(R8); \
	MOVSD X8, X9; MINSD X4, X9; SUBSD X0, X9; \
	XORPS X12, X12; UCOMISD X12, X9; JLS SLOW; \
	SQRTSD X9, X10; MULSD X6, X10; \
	MOVSD brood_p+vec_x(SI), X1; MOVSD brood_p+vec_y(SI), X2; MOVSD brood_p+vec_z(SI), X3; \
	MOVQ BX, CX; NORMAL(X1, SLOW); \
	CMPQ dim-16(SP), $2; JLT PLACE; \
	MOVQ AX, CX; SHRQ $40, CX; MOVQ BX, DX; SHRQ $39, DX; SHLQ $24, DX; ORQ DX, CX; \
	NORMAL(X2, SLOW); \
	CMPQ dim-16(SP), $3; JLT PLACE; \
	MOVQ $0xb47c73972972b7b6, AX; ADDQ BX, AX; MIX1; MOVQ AX, CX; \
	NORMAL(X3, SLOW); \
PLACE: MOVSD X1, vec_x(R9); MOVSD X2, vec_y(R9); MOVSD X3, vec_z(R9); \
	MOVSD X1, brood_p+vec_x(R8); MOVSD X2, brood_p+vec_y(R8); MOVSD X3, brood_p+vec_z(R8); \
	XORL CX, CX; UCOMISD X4, X8; SETHI CL; \
	LEAQ (CX)(CX*2), DX; LEAQ (R9)(DX*8), R9; \
	XORQ $1, CX; LEAQ (CX)(CX*2), DX; SHLQ $4, DX; ADDQ DX, R8

// func waveKernel(batch *brood, m int, out *brood, leaves *vec, slow *uint32, c *waveConsts) (outBytes, leafBytes, slowBytes int)
TEXT ·waveKernel(SB), NOSPLIT, $24-72
	MOVQ c+40(FP), AX
	MOVSD waveConsts_horizon(AX), X4
	MOVSD waveConsts_rate(AX), X5
	MOVSD waveConsts_sigma(AX), X6
	MOVSD waveConsts_lastCheck(AX), X7
	MOVQ waveConsts_d(AX), BX
	MOVQ BX, dim-16(SP)
	MOVQ waveConsts_divide(AX), BX
	MOVQ BX, div-24(SP)
	MOVQ slow+32(FP), BX
	MOVQ BX, slowp-8(SP)
	MOVQ batch+0(FP), SI
	MOVQ out+16(FP), R8
	MOVQ leaves+24(FP), R9
	LEAQ ·zigE(SB), R11
	LEAQ ·zigN(SB), R12
	MOVQ $0xbf58476d1ce4e5b9, R13
	MOVQ $0x94d049bb133111eb, R14
	XORQ DI, DI

loop:
	CMPQ DI, m+8(FP)
	JGE done
	MOVSD brood_birth(SI), X0
	// a birth at or before the last checkpoint is cut there: both children slow
	UCOMISD X7, X0
	JLS cut
	CHILD(0x9e3779b97f4a7c15, 0xd1b54a32d192ed03, slow0, div0, lived0, d20, place0)
child1:
	CHILD(0x3c6ef372fe94f82a, 0xa36a9465a325da06, slow1, div1, lived1, d21, place1)
next:
	ADDQ $brood__size, SI
	ADDQ $2, DI
	JMP loop

slow0:
	MOVQ slowp-8(SP), R10
	MOVL DI, (R10)
	ADDQ $4, R10
	MOVQ R10, slowp-8(SP)
	JMP child1

slow1:
	MOVQ slowp-8(SP), R10
	LEAQ 1(DI), CX
	MOVL CX, (R10)
	ADDQ $4, R10
	MOVQ R10, slowp-8(SP)
	JMP next

cut:
	MOVQ slowp-8(SP), R10
	MOVL DI, (R10)
	LEAQ 1(DI), CX
	MOVL CX, 4(R10)
	ADDQ $8, R10
	MOVQ R10, slowp-8(SP)
	JMP next

done:
	SUBQ out+16(FP), R8
	MOVQ R8, outBytes+48(FP)
	SUBQ leaves+24(FP), R9
	MOVQ R9, leafBytes+56(FP)
	MOVQ slowp-8(SP), R10
	SUBQ slow+32(FP), R10
	MOVQ R10, slowBytes+64(FP)
	RET
