#include "textflag.h"

// Stencil and vector kernels in AVX2 with FMA: eight float32 or four
// float64 cells at a time, then the rest of the n cells one at a time, so
// that a span of any length takes one call. The caller passes pointers to
// the first cell of a span, whose windows it has checked: the stencil
// kernels read the cells' neighbours at ±1, ±nx and ±nxy. Registers: AX is
// the cell index i; BX, DX, R8 and R15 are i−nx, i+nx, i+nxy and i−nxy.

#define NEIGHBOUR_INDICES \
	MOVQ dn+8(FP), DX; \
	MOVQ ds+16(FP), BX; \
	MOVQ du+24(FP), R8; \
	MOVQ dd+32(FP), R15; \
	XORQ AX, AX

#define STEP_INDICES(k) \
	ADDQ $k, AX; \
	ADDQ $k, BX; \
	ADDQ $k, DX; \
	ADDQ $k, R8; \
	ADDQ $k, R15

// SUM_NEIGHBOURS32 adds Σ g·x over the six neighbours to Y0 (eight cells).
#define SUM_NEIGHBOURS32 \
	VMOVUPS (DI)(AX*4), Y1; \
	VFMADD231PS 4(SI)(AX*4), Y1, Y0; \
	VMOVUPS -4(DI)(AX*4), Y2; \
	VFMADD231PS -4(SI)(AX*4), Y2, Y0; \
	VMOVUPS (R9)(AX*4), Y3; \
	VFMADD231PS (SI)(DX*4), Y3, Y0; \
	VMOVUPS (R9)(BX*4), Y4; \
	VFMADD231PS (SI)(BX*4), Y4, Y0; \
	VMOVUPS (R10)(AX*4), Y5; \
	VFMADD231PS (SI)(R8*4), Y5, Y0; \
	VMOVUPS (R10)(R15*4), Y6; \
	VFMADD231PS (SI)(R15*4), Y6, Y0

// CHEBYSHEV8 is one Chebyshev step on eight cells from AX on: values,
// stencil and right-hand side as SPAN_BEGIN places them, d at R13, the
// new values at R14, cr and cd broadcast in Y14 and Y15.
#define CHEBYSHEV8 \
	VMOVUPS (R12)(AX*4), Y0; \
	SUM_NEIGHBOURS32; \
	VMOVUPS (SI)(AX*4), Y7; \
	VMULPS (R11)(AX*4), Y0, Y0; \
	VSUBPS Y7, Y0, Y0; \
	VMULPS (R13)(AX*4), Y15, Y8; \
	VFMADD231PS Y0, Y14, Y8; \
	VMOVUPS Y8, (R13)(AX*4); \
	VADDPS Y7, Y8, Y8; \
	VMOVUPS Y8, (R14)(AX*4)

// CHEBYSHEV_TAIL is CHEBYSHEV8 for the cells AX … AX+7 that the mask
// Y13 selects: it reads all eight (the arrays have slack past their end)
// and writes only the selected ones.
#define CHEBYSHEV_TAIL \
	VMOVUPS (R12)(AX*4), Y0; \
	SUM_NEIGHBOURS32; \
	VMOVUPS (SI)(AX*4), Y7; \
	VMULPS (R11)(AX*4), Y0, Y0; \
	VSUBPS Y7, Y0, Y0; \
	VMULPS (R13)(AX*4), Y15, Y8; \
	VFMADD231PS Y0, Y14, Y8; \
	VMASKMOVPS Y8, Y13, (R13)(AX*4); \
	VADDPS Y7, Y8, Y8; \
	VMASKMOVPS Y8, Y13, (R14)(AX*4)

// RESIDUAL8 sets the scaled residual of eight cells from AX on: values,
// stencil and right-hand side as SPAN_BEGIN places them, scale at R13,
// the result at R14.
#define RESIDUAL8 \
	VMOVUPS (R12)(AX*4), Y0; \
	SUM_NEIGHBOURS32; \
	VMOVUPS (SI)(AX*4), Y7; \
	VDIVPS (R11)(AX*4), Y7, Y7; \
	VSUBPS Y7, Y0, Y0; \
	VMULPS (R13)(AX*4), Y0, Y0; \
	VMOVUPS Y0, (R14)(AX*4)

// RESIDUAL_TAIL is RESIDUAL8 for the cells the mask Y13 selects, as
// CHEBYSHEV_TAIL.
#define RESIDUAL_TAIL \
	VMOVUPS (R12)(AX*4), Y0; \
	SUM_NEIGHBOURS32; \
	VMOVUPS (SI)(AX*4), Y7; \
	VDIVPS (R11)(AX*4), Y7, Y7; \
	VSUBPS Y7, Y0, Y0; \
	VMULPS (R13)(AX*4), Y0, Y0; \
	VMASKMOVPS Y0, Y13, (R14)(AX*4)

// TAIL_MASK sets Y13 to select the first n−AX lanes (the cells of the span
// left after its whole vectors) and jumps to next when there are none.
#define TAIL_MASK(next) \
	MOVQ n-8(SP), CX; \
	SUBQ AX, CX; \
	JLE next; \
	MOVQ CX, X13; \
	VPBROADCASTD X13, Y13; \
	VPCMPGTD laneIndex<>(SB), Y13, Y13

DATA laneIndex<>+0(SB)/4, $0
DATA laneIndex<>+4(SB)/4, $1
DATA laneIndex<>+8(SB)/4, $2
DATA laneIndex<>+12(SB)/4, $3
DATA laneIndex<>+16(SB)/4, $4
DATA laneIndex<>+20(SB)/4, $5
DATA laneIndex<>+24(SB)/4, $6
DATA laneIndex<>+28(SB)/4, $7
GLOBL laneIndex<>(SB), RODATA|NOPTR, $32

// Offsets of the span fields the span-list kernels read (a test holds
// them to the Go struct).
#define SPAN_LO 0
#define SPAN_HI 8
#define SPAN_CP 16
#define SPAN_DN 24
#define SPAN_DS 32
#define SPAN_DU 40
#define SPAN_DD 48
#define SPAN_AT 56
#define SPAN_SIZE 88

// The float32 stencil kernels take a list of spans and the first element
// of each array: func(spans *span, count int, x, gx, gy, gz, inv, b, e, f
// *float32, …). For each span, SPAN_BEGIN leaves its length in n-8(SP),
// the values and conductances (from cp on) in SI, DI, R9 and R10, the
// inverse diagonal and right-hand side (from at on) in R11 and R12, and
// 4·cp in AX and 4·at in R13 for the kernel to place e and f; SPAN_LOOP
// then sets the neighbour indices, moves to the next span and starts the
// cell loop (AX = 0, CX = the length rounded down to eight). The caller
// has checked once that every span's reach lies in the arrays.
#define SPAN_BEGIN(done) \
	MOVQ count+8(FP), CX; \
	TESTQ CX, CX; \
	JLE done; \
	DECQ CX; \
	MOVQ CX, count+8(FP); \
	MOVQ spans+0(FP), CX; \
	MOVQ SPAN_HI(CX), AX; \
	SUBQ SPAN_LO(CX), AX; \
	MOVQ AX, n-8(SP); \
	MOVQ SPAN_AT(CX), R13; \
	SHLQ $2, R13; \
	MOVQ inv+48(FP), R11; \
	ADDQ R13, R11; \
	MOVQ b+56(FP), R12; \
	ADDQ R13, R12; \
	MOVQ SPAN_CP(CX), AX; \
	SHLQ $2, AX; \
	MOVQ x+16(FP), SI; \
	ADDQ AX, SI; \
	MOVQ gx+24(FP), DI; \
	ADDQ AX, DI; \
	MOVQ gy+32(FP), R9; \
	ADDQ AX, R9; \
	MOVQ gz+40(FP), R10; \
	ADDQ AX, R10

#define SPAN_LOOP \
	MOVQ SPAN_DN(CX), DX; \
	MOVQ SPAN_DS(CX), BX; \
	MOVQ SPAN_DU(CX), R8; \
	MOVQ SPAN_DD(CX), R15; \
	ADDQ $SPAN_SIZE, CX; \
	MOVQ CX, spans+0(FP); \
	MOVQ n-8(SP), CX; \
	ANDQ $-8, CX; \
	XORQ AX, AX

// HSUM_PD leaves the sum of the four doubles of Y in the low lane of X.
#define HSUM_PD(Y, X) \
	VEXTRACTF128 $1, Y, X10; \
	VADDPD X10, X, X; \
	VHADDPD X, X, X

// func productAVX(n, dn, ds, du, dd int, p *float64, gx, gy, gz *float32, diag, q *float64) (pq float64)
// q = diag·p − Σ g·p_nb; returns Σ p·q.
TEXT ·productAVX(SB), NOSPLIT, $0-96
	MOVQ n+0(FP), CX
	ANDQ $-4, CX
	NEIGHBOUR_INDICES
	MOVQ p+40(FP), SI
	MOVQ gx+48(FP), DI
	MOVQ gy+56(FP), R9
	MOVQ gz+64(FP), R10
	MOVQ diag+72(FP), R11
	MOVQ q+80(FP), R12
	VXORPD Y9, Y9, Y9
	CMPQ AX, CX
	JGE prodTail
prodLoop:
	VMOVUPD (SI)(AX*8), Y7
	VMULPD (R11)(AX*8), Y7, Y0
	VCVTPS2PD (DI)(AX*4), Y1
	VFNMADD231PD 8(SI)(AX*8), Y1, Y0
	VCVTPS2PD -4(DI)(AX*4), Y2
	VFNMADD231PD -8(SI)(AX*8), Y2, Y0
	VCVTPS2PD (R9)(AX*4), Y3
	VFNMADD231PD (SI)(DX*8), Y3, Y0
	VCVTPS2PD (R9)(BX*4), Y4
	VFNMADD231PD (SI)(BX*8), Y4, Y0
	VCVTPS2PD (R10)(AX*4), Y5
	VFNMADD231PD (SI)(R8*8), Y5, Y0
	VCVTPS2PD (R10)(R15*4), Y6
	VFNMADD231PD (SI)(R15*8), Y6, Y0
	VMOVUPD Y0, (R12)(AX*8)
	VFMADD231PD Y7, Y0, Y9
	STEP_INDICES(4)
	CMPQ AX, CX
	JLT prodLoop
prodTail:
	HSUM_PD(Y9, X9)
	MOVQ n+0(FP), CX
	CMPQ AX, CX
	JGE prodDone
prodTailLoop:
	VMOVSD (SI)(AX*8), X7
	VMULSD (R11)(AX*8), X7, X0
	VCVTSS2SD (DI)(AX*4), X1, X1
	VFNMADD231SD 8(SI)(AX*8), X1, X0
	VCVTSS2SD -4(DI)(AX*4), X2, X2
	VFNMADD231SD -8(SI)(AX*8), X2, X0
	VCVTSS2SD (R9)(AX*4), X3, X3
	VFNMADD231SD (SI)(DX*8), X3, X0
	VCVTSS2SD (R9)(BX*4), X4, X4
	VFNMADD231SD (SI)(BX*8), X4, X0
	VCVTSS2SD (R10)(AX*4), X5, X5
	VFNMADD231SD (SI)(R8*8), X5, X0
	VCVTSS2SD (R10)(R15*4), X6, X6
	VFNMADD231SD (SI)(R15*8), X6, X0
	VMOVSD X0, (R12)(AX*8)
	VFMADD231SD X7, X0, X9
	STEP_INDICES(1)
	CMPQ AX, CX
	JLT prodTailLoop
prodDone:
	VMOVSD X9, pq+88(FP)
	VZEROUPPER
	RET

// func axpyAVX(n int, w float32, src, dst *float32)
// dst += w·src.
TEXT ·axpyAVX(SB), NOSPLIT, $0-32
	MOVQ n+0(FP), CX
	ANDQ $-8, CX
	VBROADCASTSS w+8(FP), Y1
	MOVQ src+16(FP), SI
	MOVQ dst+24(FP), DI
	XORQ AX, AX
	CMPQ AX, CX
	JGE axpyTail
axpyLoop:
	VMOVUPS (DI)(AX*4), Y0
	VFMADD231PS (SI)(AX*4), Y1, Y0
	VMOVUPS Y0, (DI)(AX*4)
	ADDQ $8, AX
	CMPQ AX, CX
	JLT axpyLoop
axpyTail:
	MOVQ n+0(FP), CX
	CMPQ AX, CX
	JGE axpyDone
axpyTailLoop:
	VMOVSS (DI)(AX*4), X0
	VFMADD231SS (SI)(AX*4), X1, X0
	VMOVSS X0, (DI)(AX*4)
	ADDQ $1, AX
	CMPQ AX, CX
	JLT axpyTailLoop
axpyDone:
	VZEROUPPER
	RET

// func updateAVX(n int, alpha float64, x, p, r, q *float64, rb *float32) (rr float64)
// x += α·p, r −= α·q, rb = float32(r); returns Σ r².
TEXT ·updateAVX(SB), NOSPLIT, $0-64
	MOVQ n+0(FP), CX
	ANDQ $-4, CX
	VBROADCASTSD alpha+8(FP), Y15
	MOVQ x+16(FP), SI
	MOVQ p+24(FP), DI
	MOVQ r+32(FP), R8
	MOVQ q+40(FP), R9
	MOVQ rb+48(FP), R10
	VXORPD Y9, Y9, Y9
	XORQ AX, AX
	CMPQ AX, CX
	JGE updTail
updLoop:
	VMOVUPD (SI)(AX*8), Y0
	VFMADD231PD (DI)(AX*8), Y15, Y0
	VMOVUPD Y0, (SI)(AX*8)
	VMOVUPD (R8)(AX*8), Y1
	VFNMADD231PD (R9)(AX*8), Y15, Y1
	VMOVUPD Y1, (R8)(AX*8)
	VCVTPD2PSY Y1, X2
	VMOVUPS X2, (R10)(AX*4)
	VFMADD231PD Y1, Y1, Y9
	ADDQ $4, AX
	CMPQ AX, CX
	JLT updLoop
updTail:
	HSUM_PD(Y9, X9)
	MOVQ n+0(FP), CX
	CMPQ AX, CX
	JGE updDone
updTailLoop:
	VMOVSD (SI)(AX*8), X0
	VFMADD231SD (DI)(AX*8), X15, X0
	VMOVSD X0, (SI)(AX*8)
	VMOVSD (R8)(AX*8), X1
	VFNMADD231SD (R9)(AX*8), X15, X1
	VMOVSD X1, (R8)(AX*8)
	VCVTSD2SS X1, X2, X2
	VMOVSS X2, (R10)(AX*4)
	VFMADD231SD X1, X1, X9
	ADDQ $1, AX
	CMPQ AX, CX
	JLT updTailLoop
updDone:
	VMOVSD X9, rr+56(FP)
	VZEROUPPER
	RET

// func directionAVX(n int, beta float64, z *float32, p *float64)
// p = z + β·p.
TEXT ·directionAVX(SB), NOSPLIT, $0-32
	MOVQ n+0(FP), CX
	ANDQ $-4, CX
	VBROADCASTSD beta+8(FP), Y15
	MOVQ z+16(FP), SI
	MOVQ p+24(FP), DI
	XORQ AX, AX
	CMPQ AX, CX
	JGE dirTail
dirLoop:
	VCVTPS2PD (SI)(AX*4), Y0
	VFMADD231PD (DI)(AX*8), Y15, Y0
	VMOVUPD Y0, (DI)(AX*8)
	ADDQ $4, AX
	CMPQ AX, CX
	JLT dirLoop
dirTail:
	MOVQ n+0(FP), CX
	CMPQ AX, CX
	JGE dirDone
dirTailLoop:
	VCVTSS2SD (SI)(AX*4), X0, X0
	VFMADD231SD (DI)(AX*8), X15, X0
	VMOVSD X0, (DI)(AX*8)
	ADDQ $1, AX
	CMPQ AX, CX
	JLT dirTailLoop
dirDone:
	VZEROUPPER
	RET

// func dotAVX(n int, r *float64, z *float32, q *float64) (rz, zq float64)
// Σ r·z and Σ z·q.
TEXT ·dotAVX(SB), NOSPLIT, $0-48
	MOVQ n+0(FP), CX
	ANDQ $-4, CX
	MOVQ r+8(FP), SI
	MOVQ z+16(FP), DI
	MOVQ q+24(FP), R8
	VXORPD Y8, Y8, Y8
	VXORPD Y9, Y9, Y9
	XORQ AX, AX
	CMPQ AX, CX
	JGE dotTail
dotLoop:
	VCVTPS2PD (DI)(AX*4), Y0
	VFMADD231PD (SI)(AX*8), Y0, Y8
	VFMADD231PD (R8)(AX*8), Y0, Y9
	ADDQ $4, AX
	CMPQ AX, CX
	JLT dotLoop
dotTail:
	HSUM_PD(Y8, X8)
	HSUM_PD(Y9, X9)
	MOVQ n+0(FP), CX
	CMPQ AX, CX
	JGE dotDone
dotTailLoop:
	VCVTSS2SD (DI)(AX*4), X0, X0
	VFMADD231SD (SI)(AX*8), X0, X8
	VFMADD231SD (R8)(AX*8), X0, X9
	ADDQ $1, AX
	CMPQ AX, CX
	JLT dotTailLoop
dotDone:
	VMOVSD X8, rz+32(FP)
	VMOVSD X9, zq+40(FP)
	VZEROUPPER
	RET

// func fromZeroSpansAVX(spans *span, count int, b, inv, d, dst *float32, cr float32)
// On each span: d = dst = cr·b·inv, the first Chebyshev step from x = 0;
// b and inv from the span's at on, d and dst from its cp on. The last
// vector of a span is masked, as in the stencil kernels.
TEXT ·fromZeroSpansAVX(SB), NOSPLIT, $0-52
	VBROADCASTSS cr+48(FP), Y15
	MOVQ spans+0(FP), R10
	MOVQ count+8(FP), R11
fzSpan:
	TESTQ R11, R11
	JLE fzDone
	DECQ R11
	MOVQ SPAN_HI(R10), CX
	SUBQ SPAN_LO(R10), CX
	MOVQ SPAN_AT(R10), AX
	SHLQ $2, AX
	MOVQ b+16(FP), SI
	ADDQ AX, SI
	MOVQ inv+24(FP), DI
	ADDQ AX, DI
	MOVQ SPAN_CP(R10), AX
	SHLQ $2, AX
	MOVQ d+32(FP), R8
	ADDQ AX, R8
	MOVQ dst+40(FP), R9
	ADDQ AX, R9
	ADDQ $SPAN_SIZE, R10
	MOVQ CX, DX
	ANDQ $-8, DX
	XORQ AX, AX
	CMPQ AX, DX
	JGE fzTail
fzLoop:
	VMULPS (SI)(AX*4), Y15, Y0
	VMULPS (DI)(AX*4), Y0, Y0
	VMOVUPS Y0, (R8)(AX*4)
	VMOVUPS Y0, (R9)(AX*4)
	ADDQ $8, AX
	CMPQ AX, DX
	JLT fzLoop
fzTail:
	SUBQ AX, CX
	JLE fzSpan
	MOVQ CX, X13
	VPBROADCASTD X13, Y13
	VPCMPGTD laneIndex<>(SB), Y13, Y13
	VMULPS (SI)(AX*4), Y15, Y0
	VMULPS (DI)(AX*4), Y0, Y0
	VMASKMOVPS Y0, Y13, (R8)(AX*4)
	VMASKMOVPS Y0, Y13, (R9)(AX*4)
	JMP fzSpan
fzDone:
	VZEROUPPER
	RET

DATA prolongCentre<>+0(SB)/4, $1
DATA prolongCentre<>+4(SB)/4, $1
DATA prolongCentre<>+8(SB)/4, $2
DATA prolongCentre<>+12(SB)/4, $2
DATA prolongCentre<>+16(SB)/4, $3
DATA prolongCentre<>+20(SB)/4, $3
DATA prolongCentre<>+24(SB)/4, $4
DATA prolongCentre<>+28(SB)/4, $4
GLOBL prolongCentre<>(SB), RODATA|NOPTR, $32

DATA prolongSide<>+0(SB)/4, $0
DATA prolongSide<>+4(SB)/4, $2
DATA prolongSide<>+8(SB)/4, $1
DATA prolongSide<>+12(SB)/4, $3
DATA prolongSide<>+16(SB)/4, $2
DATA prolongSide<>+20(SB)/4, $4
DATA prolongSide<>+24(SB)/4, $3
DATA prolongSide<>+28(SB)/4, $5
GLOBL prolongSide<>(SB), RODATA|NOPTR, $32

DATA quarter<>+0(SB)/4, $0.25
GLOBL quarter<>(SB), RODATA|NOPTR, $4
DATA threeQuarters<>+0(SB)/4, $0.75
GLOBL threeQuarters<>(SB), RODATA|NOPTR, $4

// func prolongAVX(parents int, row, scale, x *float32)
// For the coarse cells row[1] … row[parents] (row[0] the cell before the
// first), adds to x, eight fine cells at a time (the two children of four
// coarse cells), scale·(3/4 of the parent and 1/4 of the parent's
// neighbour on the child's side). parents is a multiple of 4; row must
// hold parents + 8 values.
TEXT ·prolongAVX(SB), NOSPLIT, $0-32
	MOVQ parents+0(FP), CX
	MOVQ row+8(FP), SI
	MOVQ scale+16(FP), DI
	MOVQ x+24(FP), R8
	VMOVDQU prolongCentre<>(SB), Y13
	VMOVDQU prolongSide<>(SB), Y12
	VBROADCASTSS threeQuarters<>(SB), Y15
	VBROADCASTSS quarter<>(SB), Y14
	XORQ AX, AX // coarse cell
	XORQ BX, BX // fine cell
	CMPQ AX, CX
	JGE prolDone
prolLoop:
	VMOVUPS (SI)(AX*4), Y0
	VPERMPS Y0, Y13, Y1
	VPERMPS Y0, Y12, Y2
	VMULPS Y14, Y2, Y2
	VFMADD231PS Y15, Y1, Y2
	VMOVUPS (R8)(BX*4), Y3
	VFMADD231PS (DI)(BX*4), Y2, Y3
	VMOVUPS Y3, (R8)(BX*4)
	ADDQ $4, AX
	ADDQ $8, BX
	CMPQ AX, CX
	JLT prolLoop
prolDone:
	VZEROUPPER
	RET

// func blend4AVX(n int, w *[4]float32, r0, r1, r2, r3, dst *float32)
// dst = w₀·r₀ + w₁·r₁ + w₂·r₂ + w₃·r₃.
TEXT ·blend4AVX(SB), NOSPLIT, $0-56
	MOVQ n+0(FP), CX
	ANDQ $-8, CX
	MOVQ w+8(FP), R9
	VBROADCASTSS 0(R9), Y12
	VBROADCASTSS 4(R9), Y13
	VBROADCASTSS 8(R9), Y14
	VBROADCASTSS 12(R9), Y15
	MOVQ r0+16(FP), SI
	MOVQ r1+24(FP), DI
	MOVQ r2+32(FP), R8
	MOVQ r3+40(FP), R10
	MOVQ dst+48(FP), R11
	XORQ AX, AX
	CMPQ AX, CX
	JGE blendTail
blendLoop:
	VMULPS (SI)(AX*4), Y12, Y0
	VMULPS (DI)(AX*4), Y13, Y1
	VFMADD231PS (R8)(AX*4), Y14, Y0
	VFMADD231PS (R10)(AX*4), Y15, Y1
	VADDPS Y1, Y0, Y0
	VMOVUPS Y0, (R11)(AX*4)
	ADDQ $8, AX
	CMPQ AX, CX
	JLT blendLoop
blendTail:
	MOVQ n+0(FP), CX
	CMPQ AX, CX
	JGE blendDone
blendTailLoop:
	VMULSS (SI)(AX*4), X12, X0
	VMULSS (DI)(AX*4), X13, X1
	VFMADD231SS (R8)(AX*4), X14, X0
	VFMADD231SS (R10)(AX*4), X15, X1
	VADDSS X1, X0, X0
	VMOVSS X0, (R11)(AX*4)
	INCQ AX
	CMPQ AX, CX
	JLT blendTailLoop
blendDone:
	VZEROUPPER
	RET


// func chebyshevSpansAVX(spans *span, count int, x, gx, gy, gz, inv, b, d, dst *float32, cr, cd float32)
// On each span: d ← cd·d + cr·(inv·(b + Σ g·x_nb) − x), dst = x + d.
TEXT ·chebyshevSpansAVX(SB), NOSPLIT, $8-88
	VBROADCASTSS cr+80(FP), Y14
	VBROADCASTSS cd+84(FP), Y15
chebSpan:
	SPAN_BEGIN(chebDone)
	MOVQ d+64(FP), R13
	ADDQ AX, R13
	MOVQ dst+72(FP), R14
	ADDQ AX, R14
	SPAN_LOOP
	CMPQ AX, CX
	JGE chebTail
chebLoop:
	CHEBYSHEV8
	STEP_INDICES(8)
	CMPQ AX, CX
	JLT chebLoop
chebTail:
	TAIL_MASK(chebSpan)
	CHEBYSHEV_TAIL
	JMP chebSpan
chebDone:
	VZEROUPPER
	RET

// func residualSpansAVX(spans *span, count int, x, gx, gy, gz, inv, b, scale, d *float32)
// On each span: d = scale·(b + Σ g·x_nb − x/inv).
TEXT ·residualSpansAVX(SB), NOSPLIT, $8-80
resSpan:
	SPAN_BEGIN(resDone)
	MOVQ d+72(FP), R14
	ADDQ AX, R14
	MOVQ scale+64(FP), AX
	ADDQ AX, R13
	SPAN_LOOP
	CMPQ AX, CX
	JGE resTail
resLoop:
	RESIDUAL8
	STEP_INDICES(8)
	CMPQ AX, CX
	JLT resLoop
resTail:
	TAIL_MASK(resSpan)
	RESIDUAL_TAIL
	JMP resSpan
resDone:
	VZEROUPPER
	RET

// func gatherAddAVX(n int, row *float32, w *[4]float32, d0, d1, d2, d3 *float32)
// For I < n: g = ¼·(row[2I] + row[2I+3]) + ¾·(row[2I+1] + row[2I+2]) and
// d_k[I] += w_k·g for k = 0 … 3: one fine row of restriction gathered
// along x and added into the four coarse rows it feeds, eight coarse
// cells at a time from sixteen fine ones split into even and odd cells.
// The shuffles leave the eight sums in the order 0 1 4 5 2 3 6 7, which
// one permute puts right.
TEXT ·gatherAddAVX(SB), NOSPLIT, $0-56
	MOVQ n+0(FP), CX
	MOVQ row+8(FP), SI
	MOVQ w+16(FP), R9
	VBROADCASTSS 0(R9), Y10
	VBROADCASTSS 4(R9), Y11
	VBROADCASTSS 8(R9), Y12
	VBROADCASTSS 12(R9), Y13
	MOVQ d0+24(FP), DI
	MOVQ d1+32(FP), R8
	MOVQ d2+40(FP), R10
	MOVQ d3+48(FP), R11
	VBROADCASTSS threeQuarters<>(SB), Y15
	VBROADCASTSS quarter<>(SB), Y14
	MOVQ CX, DX
	ANDQ $-8, DX
	XORQ AX, AX // coarse cell
	XORQ BX, BX // its first fine cell in row
	CMPQ AX, DX
	JGE gaddTail
gaddLoop:
	VMOVUPS (SI)(BX*4), Y0
	VMOVUPS 32(SI)(BX*4), Y1
	VMOVUPS 8(SI)(BX*4), Y2
	VMOVUPS 40(SI)(BX*4), Y3
	VSHUFPS $0x88, Y1, Y0, Y4
	VSHUFPS $0xDD, Y1, Y0, Y5
	VSHUFPS $0x88, Y3, Y2, Y6
	VSHUFPS $0xDD, Y3, Y2, Y7
	VADDPS Y7, Y4, Y4
	VADDPS Y6, Y5, Y5
	VMULPS Y14, Y4, Y4
	VFMADD231PS Y15, Y5, Y4
	VPERMPD $0xD8, Y4, Y4
	VMOVUPS (DI)(AX*4), Y0
	VFMADD231PS Y4, Y10, Y0
	VMOVUPS Y0, (DI)(AX*4)
	VMOVUPS (R8)(AX*4), Y1
	VFMADD231PS Y4, Y11, Y1
	VMOVUPS Y1, (R8)(AX*4)
	VMOVUPS (R10)(AX*4), Y2
	VFMADD231PS Y4, Y12, Y2
	VMOVUPS Y2, (R10)(AX*4)
	VMOVUPS (R11)(AX*4), Y3
	VFMADD231PS Y4, Y13, Y3
	VMOVUPS Y3, (R11)(AX*4)
	ADDQ $8, AX
	ADDQ $16, BX
	CMPQ AX, DX
	JLT gaddLoop
gaddTail:
	CMPQ AX, CX
	JGE gaddDone
gaddTailLoop:
	VMOVSS (SI)(BX*4), X4
	VADDSS 12(SI)(BX*4), X4, X4
	VMOVSS 4(SI)(BX*4), X5
	VADDSS 8(SI)(BX*4), X5, X5
	VMULSS X14, X4, X4
	VFMADD231SS X15, X5, X4
	VMOVSS (DI)(AX*4), X0
	VFMADD231SS X4, X10, X0
	VMOVSS X0, (DI)(AX*4)
	VMOVSS (R8)(AX*4), X1
	VFMADD231SS X4, X11, X1
	VMOVSS X1, (R8)(AX*4)
	VMOVSS (R10)(AX*4), X2
	VFMADD231SS X4, X12, X2
	VMOVSS X2, (R10)(AX*4)
	VMOVSS (R11)(AX*4), X3
	VFMADD231SS X4, X13, X3
	VMOVSS X3, (R11)(AX*4)
	INCQ AX
	ADDQ $2, BX
	CMPQ AX, CX
	JLT gaddTailLoop
gaddDone:
	VZEROUPPER
	RET
