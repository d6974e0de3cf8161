//go:build !purego

// waveKernel1, waveKernel2 and waveKernel3 (declared in wave_amd64.go): one step of a
// batch of binary broods in 1, 2 and 3 dimensions, as fastStep in wave.go takes it. The
// plain versions take 1/beta and sigma from strips scaled by them (scaledStrips); the
// Div versions divide each lifetime by beta, the Sig versions multiply each increment's
// standard deviation by sigma.
// Each floating-point step is the same single IEEE operation on the same operands as in
// fastStep, or a product by a power of two moved into the strips, which is exact
// (scaledStrips); so the records are the same bits (TestWaveKernelMatchesLoop,
// TestWaveMatchesNode). The
// body is wave_kernel_amd64.h, one child's steps wave_child_amd64.h, included once per
// dimension and way of applying the rate and sigma: the unused coordinates are neither
// loaded nor stored (they stay 0), and no test on the rate or sigma is left in the loop.
//
// Registers: SI the brood, DI the number of its first child, R8 the next brood to
// push, R9 the next leaf, R11 and R12 the exponential's and the normal's ziggurat
// strips (waveConsts.exp and norm), R13 and R14 mix64's multipliers; AX and BX a child's key, CX,
// DX and R10 scratch. X0 the brood's birth time, X1-X3 the child's position, X4 the
// horizon, X5 beta, X6 sigma, X7 the last checkpoint time, X8 the death, X9 the
// time moved, X10 its standard deviation, X11 scratch, X12 zero.

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

// NORMAL draws the normal of the word in WORD (which it leaves as it is) by the
// ziggurat's fast path (zigNormal) and adds sd (X10) times it to POS; a draw that does
// not stand jumps to SLOW. The strip's offset is (WORD>>32 & 0x7f) * 16. The test
// |j| < k is one 32-bit comparison, uint32(j + k - 1) < 2k - 1 (normal32,
// TestZigStrips): where j + k - 1 < 0 it wraps to at least 2^31 + k - 1 > 2k - 1, as
// k < 2^31. Uses DX, R10 and X11.
#define NORMAL(WORD, POS, SLOW) \
	MOVQ WORD, DX; SHRQ $28, DX; ANDL $0x7f0, DX; \
	MOVL WORD, R10; ADDL 8(R12)(DX*1), R10; CMPL R10, 12(R12)(DX*1); JCC SLOW; \
	XORPS X11, X11; CVTSL2SD WORD, X11; MULSD 0(R12)(DX*1), X11; \
	MULSD X10, X11; ADDSD X11, POS

// func waveKernel1(batch *brood, m int, out *brood, leaves *vec, slow *uint32, c *waveConsts) (outBytes, leafBytes, slowBytes int)
TEXT ·waveKernel1(SB), NOSPLIT, $16-72
#include "wave_kernel_amd64.h"

// func waveKernel1Sig(batch *brood, m int, out *brood, leaves *vec, slow *uint32, c *waveConsts) (outBytes, leafBytes, slowBytes int)
TEXT ·waveKernel1Sig(SB), NOSPLIT, $16-72
#define SIGMA
#include "wave_kernel_amd64.h"

// func waveKernel1Div(batch *brood, m int, out *brood, leaves *vec, slow *uint32, c *waveConsts) (outBytes, leafBytes, slowBytes int)
TEXT ·waveKernel1Div(SB), NOSPLIT, $16-72
#define DIVIDE
#include "wave_kernel_amd64.h"

// func waveKernel1DivSig(batch *brood, m int, out *brood, leaves *vec, slow *uint32, c *waveConsts) (outBytes, leafBytes, slowBytes int)
TEXT ·waveKernel1DivSig(SB), NOSPLIT, $16-72
#define DIVIDE
#define SIGMA
#include "wave_kernel_amd64.h"

// func waveKernel2(batch *brood, m int, out *brood, leaves *vec, slow *uint32, c *waveConsts) (outBytes, leafBytes, slowBytes int)
TEXT ·waveKernel2(SB), NOSPLIT, $16-72
#define DIM2
#include "wave_kernel_amd64.h"

// func waveKernel2Sig(batch *brood, m int, out *brood, leaves *vec, slow *uint32, c *waveConsts) (outBytes, leafBytes, slowBytes int)
TEXT ·waveKernel2Sig(SB), NOSPLIT, $16-72
#define DIM2
#define SIGMA
#include "wave_kernel_amd64.h"

// func waveKernel2Div(batch *brood, m int, out *brood, leaves *vec, slow *uint32, c *waveConsts) (outBytes, leafBytes, slowBytes int)
TEXT ·waveKernel2Div(SB), NOSPLIT, $16-72
#define DIM2
#define DIVIDE
#include "wave_kernel_amd64.h"

// func waveKernel2DivSig(batch *brood, m int, out *brood, leaves *vec, slow *uint32, c *waveConsts) (outBytes, leafBytes, slowBytes int)
TEXT ·waveKernel2DivSig(SB), NOSPLIT, $16-72
#define DIM2
#define DIVIDE
#define SIGMA
#include "wave_kernel_amd64.h"

// func waveKernel3(batch *brood, m int, out *brood, leaves *vec, slow *uint32, c *waveConsts) (outBytes, leafBytes, slowBytes int)
TEXT ·waveKernel3(SB), NOSPLIT, $16-72
#define DIM2
#define DIM3
#include "wave_kernel_amd64.h"

// func waveKernel3Sig(batch *brood, m int, out *brood, leaves *vec, slow *uint32, c *waveConsts) (outBytes, leafBytes, slowBytes int)
TEXT ·waveKernel3Sig(SB), NOSPLIT, $16-72
#define DIM2
#define DIM3
#define SIGMA
#include "wave_kernel_amd64.h"

// func waveKernel3Div(batch *brood, m int, out *brood, leaves *vec, slow *uint32, c *waveConsts) (outBytes, leafBytes, slowBytes int)
TEXT ·waveKernel3Div(SB), NOSPLIT, $16-72
#define DIM2
#define DIM3
#define DIVIDE
#include "wave_kernel_amd64.h"

// func waveKernel3DivSig(batch *brood, m int, out *brood, leaves *vec, slow *uint32, c *waveConsts) (outBytes, leafBytes, slowBytes int)
TEXT ·waveKernel3DivSig(SB), NOSPLIT, $16-72
#define DIM2
#define DIM3
#define DIVIDE
#define SIGMA
#include "wave_kernel_amd64.h"
