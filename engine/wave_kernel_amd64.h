// The body of the waveKernel functions (wave_amd64.s): DIM2 is defined for 2
// dimensions and more, DIM3 for 3, DIVIDE where the lifetime is e/beta rather than
// taken from strips scaled by 1/beta, SIGMA where the increment is multiplied by sigma
// rather than taken from strips scaled by it.

	MOVQ c+40(FP), AX
	MOVSD waveConsts_horizon(AX), X4
	MOVSD waveConsts_beta(AX), X5
	MOVSD waveConsts_sigma(AX), X6
	MOVSD waveConsts_lastCheck(AX), X7
	MOVQ slow+32(FP), BX
	MOVQ BX, slowp-8(SP)
	MOVQ batch+0(FP), SI
	MOVQ m+8(FP), BX
	SHRQ $1, BX
	IMUL3Q $brood__size, BX, BX
	ADDQ SI, BX
	MOVQ BX, end-16(SP)
	MOVQ out+16(FP), R8
	MOVQ leaves+24(FP), R9
	MOVQ waveConsts_exp(AX), R11
	MOVQ waveConsts_norm(AX), R12
	MOVQ $0xbf58476d1ce4e5b9, R13
	MOVQ $0x94d049bb133111eb, R14
	XORPS X12, X12
	XORQ DI, DI
	CMPQ SI, BX
	JGE done

loop:
	MOVSD brood_birth(SI), X0
	// a birth at or before the last checkpoint is cut there: both children slow
	UCOMISD X7, X0
	JLS cut

#define GHI 0x9e3779b97f4a7c15
#define GLO 0xd1b54a32d192ed03
#define SLOW slow0
#include "wave_child_amd64.h"
#undef GHI
#undef GLO
#undef SLOW

child1:
#define GHI 0x3c6ef372fe94f82a
#define GLO 0xa36a9465a325da06
#define SLOW slow1
#include "wave_child_amd64.h"
#undef GHI
#undef GLO
#undef SLOW

next:
	ADDQ $brood__size, SI
	ADDQ $2, DI
	CMPQ SI, end-16(SP)
	JLT loop

done:
	SUBQ out+16(FP), R8
	MOVQ R8, outBytes+48(FP)
	SUBQ leaves+24(FP), R9
	MOVQ R9, leafBytes+56(FP)
	MOVQ slowp-8(SP), R10
	SUBQ slow+32(FP), R10
	MOVQ R10, slowBytes+64(FP)
	RET

// children the fast paths cannot take, listed by number
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

#ifdef DIM2
#undef DIM2
#endif
#ifdef DIM3
#undef DIM3
#endif
#ifdef DIVIDE
#undef DIVIDE
#endif
#ifdef SIGMA
#undef SIGMA
#endif
