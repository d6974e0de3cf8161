// One child's step in waveKernel1, 2 and 3 (wave_kernel_amd64.h): child n of the
// brood at SI, GHI and GLO being n*childGammaHi and n*childGammaLo. Its key
// (childOf), lifetime and position, then it is written as a leaf or a brood: both are
// written, and the leaf test (death > horizon) moves one of the two pointers. A child
// the fast paths cannot take jumps to SLOW.

	// the key: a + n*childGammaHi, b + n*childGammaLo, mixed
	MOVQ brood_a(SI), AX
	MOVQ $GHI, DX
	ADDQ DX, AX
	MOVQ brood_b(SI), BX
	MOVQ $GLO, DX
	ADDQ DX, BX
	MIX2
	// the brood it would push: its mixes (key.mixes)
	MOVQ BX, CX
	ROLQ $32, CX
	XORQ AX, CX
	MOVQ CX, brood_a(R8)
	MOVQ AX, DX
	ROLQ $23, DX
	XORQ BX, DX
	MOVQ DX, brood_b(R8)
	// the lifetime's exponential from the high half (zigExp)
	MOVQ AX, DX
	SHRQ $28, DX
	ANDL $0xff0, DX // uint8(AX>>32) * 16, the strip's offset
	MOVL AX, CX
	CMPL CX, 12(R11)(DX*1)
	JCC SLOW
	XORPS X8, X8
	CVTSQ2SD CX, X8
	MULSD 0(R11)(DX*1), X8
	// death = birth + e/beta (e is already e*(1/beta) where the strips are scaled)
#ifdef DIVIDE
	DIVSD X5, X8
#endif
	ADDSD X0, X8
	MOVSD X8, brood_birth(R8)
	// dt = min(death, horizon) - birth, which must be > 0; sd = sigma*sqrt(dt), or
	// sqrt(dt) where the normal's strips are scaled by sigma
	MOVSD X8, X9
	MINSD X4, X9
	SUBSD X0, X9
	UCOMISD X12, X9
	JLS SLOW
	SQRTSD X9, X10
#ifdef SIGMA
	MULSD X6, X10
#endif
	// the normals: the low half; the spare bits; mix64(lo + normal2Gamma)
	MOVSD brood_p+vec_x(SI), X1
	NORMAL(BX, X1, SLOW)
#ifdef DIM2
	MOVSD brood_p+vec_y(SI), X2
	MOVQ AX, CX
	SHRQ $40, CX
	MOVQ BX, DX
	SHRQ $39, DX
	SHLQ $24, DX
	ORQ DX, CX
	NORMAL(CX, X2, SLOW)
#endif
#ifdef DIM3
	MOVSD brood_p+vec_z(SI), X3
	MOVQ $0xb47c73972972b7b6, AX
	ADDQ BX, AX
	MIX1
	NORMAL(AX, X3, SLOW)
#endif
	// leaf or brood
	MOVSD X1, vec_x(R9)
	MOVSD X1, brood_p+vec_x(R8)
#ifdef DIM2
	MOVSD X2, vec_y(R9)
	MOVSD X2, brood_p+vec_y(R8)
#endif
#ifdef DIM3
	MOVSD X3, vec_z(R9)
	MOVSD X3, brood_p+vec_z(R8)
#endif
	LEAQ vec__size(R9), CX
	LEAQ brood__size(R8), DX
	UCOMISD X4, X8
	CMOVQHI CX, R9
	CMOVQLS DX, R8
