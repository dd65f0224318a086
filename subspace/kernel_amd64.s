//go:build amd64 && !purego

#include "textflag.h"

// One step l of the tile: three vectors of b (12 columns), each row's
// a-entry broadcast, twelve fused multiply-adds into Y0–Y11.
#define STEP(aoff, boff) \
	VMOVUPD      boff(BX), Y12 \
	VMOVUPD      boff+32(BX), Y13 \
	VMOVUPD      boff+64(BX), Y14 \
	VBROADCASTSD aoff(AX), Y15 \
	VFMADD231PD  Y12, Y15, Y0 \
	VFMADD231PD  Y13, Y15, Y1 \
	VFMADD231PD  Y14, Y15, Y2 \
	VBROADCASTSD aoff+8(AX), Y15 \
	VFMADD231PD  Y12, Y15, Y3 \
	VFMADD231PD  Y13, Y15, Y4 \
	VFMADD231PD  Y14, Y15, Y5 \
	VBROADCASTSD aoff+16(AX), Y15 \
	VFMADD231PD  Y12, Y15, Y6 \
	VFMADD231PD  Y13, Y15, Y7 \
	VFMADD231PD  Y14, Y15, Y8 \
	VBROADCASTSD aoff+24(AX), Y15 \
	VFMADD231PD  Y12, Y15, Y9 \
	VFMADD231PD  Y13, Y15, Y10 \
	VFMADD231PD  Y14, Y15, Y11

// One row of the tile: c[0:12] += three accumulators.
#define ROW(r0, r1, r2) \
	VMOVUPD 0(DI), Y12 \
	VMOVUPD 32(DI), Y13 \
	VMOVUPD 64(DI), Y14 \
	VADDPD  r0, Y12, Y12 \
	VADDPD  r1, Y13, Y13 \
	VADDPD  r2, Y14, Y14 \
	VMOVUPD Y12, 0(DI) \
	VMOVUPD Y13, 32(DI) \
	VMOVUPD Y14, 64(DI) \
	ADDQ    SI, DI

// func tile4x12(kc int, a, b, c *float64, ldc int)
//
// The four rows of c are prefetched first (their 96 bytes span at most
// the lines of bytes 0 and 95), so that their loads at the end do not wait.
//
// c[i·ldc + j] += Σ_{l<kc} a[4l + i]·b[12l + j] for i < 4, j < 12: each
// sum is accumulated in order of l in one lane of Y0–Y11 (one row of the
// tile in three registers) with fused multiply-adds, then added to c.
TEXT ·tile4x12(SB), NOSPLIT, $0-40
	MOVQ kc+0(FP), CX
	MOVQ a+8(FP), AX
	MOVQ b+16(FP), BX
	MOVQ c+24(FP), DI
	MOVQ ldc+32(FP), SI
	SHLQ $3, SI
	MOVQ DI, R8
	PREFETCHT0 0(R8)
	PREFETCHT0 95(R8)
	ADDQ SI, R8
	PREFETCHT0 0(R8)
	PREFETCHT0 95(R8)
	ADDQ SI, R8
	PREFETCHT0 0(R8)
	PREFETCHT0 95(R8)
	ADDQ SI, R8
	PREFETCHT0 0(R8)
	PREFETCHT0 95(R8)
	VXORPD Y0, Y0, Y0
	VXORPD Y1, Y1, Y1
	VXORPD Y2, Y2, Y2
	VXORPD Y3, Y3, Y3
	VXORPD Y4, Y4, Y4
	VXORPD Y5, Y5, Y5
	VXORPD Y6, Y6, Y6
	VXORPD Y7, Y7, Y7
	VXORPD Y8, Y8, Y8
	VXORPD Y9, Y9, Y9
	VXORPD Y10, Y10, Y10
	VXORPD Y11, Y11, Y11
	MOVQ CX, DX
	SHRQ $1, DX
	JEQ  tail

pair:
	STEP(0, 0)
	STEP(32, 96)
	ADDQ $64, AX
	ADDQ $192, BX
	DECQ DX
	JNZ  pair

tail:
	TESTQ $1, CX
	JEQ   store
	STEP(0, 0)

store:
	ROW(Y0, Y1, Y2)
	ROW(Y3, Y4, Y5)
	ROW(Y6, Y7, Y8)
	ROW(Y9, Y10, Y11)
	VZEROUPPER
	RET

// One row r of the unfused tile: the row's a-entry broadcast, each product
// with a vector of b rounded (VMULPD) and then added (VADDPD).
#define SEPROW(aoff, boff, r0, r1, r2) \
	VBROADCASTSD aoff(AX), Y15 \
	VMULPD       boff(BX), Y15, Y12 \
	VMULPD       boff+32(BX), Y15, Y13 \
	VMULPD       boff+64(BX), Y15, Y14 \
	VADDPD       Y12, r0, r0 \
	VADDPD       Y13, r1, r1 \
	VADDPD       Y14, r2, r2

// func tile4x12Sep(kc int, a, b, c *float64, ldc int)
//
// tile4x12 without fused multiply-adds: every product a·b is rounded to
// binary64 before it is added, exactly as Go code that writes float64(a*b)
// (used where a proof counts the products' rounding, see orthogonality).
TEXT ·tile4x12Sep(SB), NOSPLIT, $0-40
	MOVQ kc+0(FP), CX
	MOVQ a+8(FP), AX
	MOVQ b+16(FP), BX
	MOVQ c+24(FP), DI
	MOVQ ldc+32(FP), SI
	SHLQ $3, SI
	MOVQ DI, R8
	PREFETCHT0 0(R8)
	PREFETCHT0 95(R8)
	ADDQ SI, R8
	PREFETCHT0 0(R8)
	PREFETCHT0 95(R8)
	ADDQ SI, R8
	PREFETCHT0 0(R8)
	PREFETCHT0 95(R8)
	ADDQ SI, R8
	PREFETCHT0 0(R8)
	PREFETCHT0 95(R8)
	VXORPD Y0, Y0, Y0
	VXORPD Y1, Y1, Y1
	VXORPD Y2, Y2, Y2
	VXORPD Y3, Y3, Y3
	VXORPD Y4, Y4, Y4
	VXORPD Y5, Y5, Y5
	VXORPD Y6, Y6, Y6
	VXORPD Y7, Y7, Y7
	VXORPD Y8, Y8, Y8
	VXORPD Y9, Y9, Y9
	VXORPD Y10, Y10, Y10
	VXORPD Y11, Y11, Y11
	TESTQ CX, CX
	JEQ   sepstore

seploop:
	SEPROW(0, 0, Y0, Y1, Y2)
	SEPROW(8, 0, Y3, Y4, Y5)
	SEPROW(16, 0, Y6, Y7, Y8)
	SEPROW(24, 0, Y9, Y10, Y11)
	ADDQ $32, AX
	ADDQ $96, BX
	DECQ CX
	JNZ  seploop

sepstore:
	ROW(Y0, Y1, Y2)
	ROW(Y3, Y4, Y5)
	ROW(Y6, Y7, Y8)
	ROW(Y9, Y10, Y11)
	VZEROUPPER
	RET

// The AVX-512 tiles: 4 rows × 24 columns, each row in three ZMM registers
// (Z0–Z11), b's 24 columns in Z12–Z14, the broadcast a-entry in Z15.
#define STEP24(aoff, boff) \
	VMOVUPD      boff(BX), Z12 \
	VMOVUPD      boff+64(BX), Z13 \
	VMOVUPD      boff+128(BX), Z14 \
	VBROADCASTSD aoff(AX), Z15 \
	VFMADD231PD  Z12, Z15, Z0 \
	VFMADD231PD  Z13, Z15, Z1 \
	VFMADD231PD  Z14, Z15, Z2 \
	VBROADCASTSD aoff+8(AX), Z15 \
	VFMADD231PD  Z12, Z15, Z3 \
	VFMADD231PD  Z13, Z15, Z4 \
	VFMADD231PD  Z14, Z15, Z5 \
	VBROADCASTSD aoff+16(AX), Z15 \
	VFMADD231PD  Z12, Z15, Z6 \
	VFMADD231PD  Z13, Z15, Z7 \
	VFMADD231PD  Z14, Z15, Z8 \
	VBROADCASTSD aoff+24(AX), Z15 \
	VFMADD231PD  Z12, Z15, Z9 \
	VFMADD231PD  Z13, Z15, Z10 \
	VFMADD231PD  Z14, Z15, Z11

#define SEPROW24(aoff, r0, r1, r2) \
	VBROADCASTSD aoff(AX), Z15 \
	VMULPD       0(BX), Z15, Z12 \
	VMULPD       64(BX), Z15, Z13 \
	VMULPD       128(BX), Z15, Z14 \
	VADDPD       Z12, r0, r0 \
	VADDPD       Z13, r1, r1 \
	VADDPD       Z14, r2, r2

#define ROW24(r0, r1, r2) \
	VMOVUPD 0(DI), Z12 \
	VMOVUPD 64(DI), Z13 \
	VMOVUPD 128(DI), Z14 \
	VADDPD  r0, Z12, Z12 \
	VADDPD  r1, Z13, Z13 \
	VADDPD  r2, Z14, Z14 \
	VMOVUPD Z12, 0(DI) \
	VMOVUPD Z13, 64(DI) \
	VMOVUPD Z14, 128(DI) \
	ADDQ    SI, DI

// Prefetch the four rows of c (192 bytes each: the lines of bytes 0, 64,
// 128 and 191) and clear the accumulators.
#define START24 \
	MOVQ       DI, R8 \
	PREFETCHT0 0(R8) \
	PREFETCHT0 64(R8) \
	PREFETCHT0 128(R8) \
	PREFETCHT0 191(R8) \
	ADDQ       SI, R8 \
	PREFETCHT0 0(R8) \
	PREFETCHT0 64(R8) \
	PREFETCHT0 128(R8) \
	PREFETCHT0 191(R8) \
	ADDQ       SI, R8 \
	PREFETCHT0 0(R8) \
	PREFETCHT0 64(R8) \
	PREFETCHT0 128(R8) \
	PREFETCHT0 191(R8) \
	ADDQ       SI, R8 \
	PREFETCHT0 0(R8) \
	PREFETCHT0 64(R8) \
	PREFETCHT0 128(R8) \
	PREFETCHT0 191(R8) \
	VPXORQ     Z0, Z0, Z0 \
	VPXORQ     Z1, Z1, Z1 \
	VPXORQ     Z2, Z2, Z2 \
	VPXORQ     Z3, Z3, Z3 \
	VPXORQ     Z4, Z4, Z4 \
	VPXORQ     Z5, Z5, Z5 \
	VPXORQ     Z6, Z6, Z6 \
	VPXORQ     Z7, Z7, Z7 \
	VPXORQ     Z8, Z8, Z8 \
	VPXORQ     Z9, Z9, Z9 \
	VPXORQ     Z10, Z10, Z10 \
	VPXORQ     Z11, Z11, Z11

// func tile4x24(kc int, a, b, c *float64, ldc int)
//
// c[i·ldc + j] += Σ_{l<kc} a[4l + i]·b[24l + j] for i < 4, j < 24, with
// fused multiply-adds, each sum in order of l in one lane, then added to c.
TEXT ·tile4x24(SB), NOSPLIT, $0-40
	MOVQ kc+0(FP), CX
	MOVQ a+8(FP), AX
	MOVQ b+16(FP), BX
	MOVQ c+24(FP), DI
	MOVQ ldc+32(FP), SI
	SHLQ $3, SI
	START24
	MOVQ CX, DX
	SHRQ $1, DX
	JEQ  tail24

pair24:
	STEP24(0, 0)
	STEP24(32, 192)
	ADDQ $64, AX
	ADDQ $384, BX
	DECQ DX
	JNZ  pair24

tail24:
	TESTQ $1, CX
	JEQ   store24
	STEP24(0, 0)

store24:
	ROW24(Z0, Z1, Z2)
	ROW24(Z3, Z4, Z5)
	ROW24(Z6, Z7, Z8)
	ROW24(Z9, Z10, Z11)
	VZEROUPPER
	RET

// func tile4x24Sep(kc int, a, b, c *float64, ldc int)
//
// tile4x24 without fused multiply-adds: every product rounded (VMULPD),
// then added (VADDPD), as tile4x12Sep.
TEXT ·tile4x24Sep(SB), NOSPLIT, $0-40
	MOVQ kc+0(FP), CX
	MOVQ a+8(FP), AX
	MOVQ b+16(FP), BX
	MOVQ c+24(FP), DI
	MOVQ ldc+32(FP), SI
	SHLQ $3, SI
	START24
	TESTQ CX, CX
	JEQ   sepstore24

seploop24:
	SEPROW24(0, Z0, Z1, Z2)
	SEPROW24(8, Z3, Z4, Z5)
	SEPROW24(16, Z6, Z7, Z8)
	SEPROW24(24, Z9, Z10, Z11)
	ADDQ $32, AX
	ADDQ $192, BX
	DECQ CX
	JNZ  seploop24

sepstore24:
	ROW24(Z0, Z1, Z2)
	ROW24(Z3, Z4, Z5)
	ROW24(Z6, Z7, Z8)
	ROW24(Z9, Z10, Z11)
	VZEROUPPER
	RET

// func dotAsm(n int, x, y *float64) float64
//
// Σ x_i·y_i with fused multiply-adds, in four AVX2 accumulators of four
// lanes (16 entries a step), then the lanes summed and the last n mod 16
// products added one by one.
TEXT ·dotAsm(SB), NOSPLIT, $0-32
	MOVQ   n+0(FP), CX
	MOVQ   x+8(FP), SI
	MOVQ   y+16(FP), DI
	VXORPD Y0, Y0, Y0
	VXORPD Y1, Y1, Y1
	VXORPD Y2, Y2, Y2
	VXORPD Y3, Y3, Y3
	CMPQ   CX, $16
	JLT    dotreduce

dotloop:
	VMOVUPD     0(SI), Y4
	VMOVUPD     32(SI), Y5
	VMOVUPD     64(SI), Y6
	VMOVUPD     96(SI), Y7
	VFMADD231PD 0(DI), Y4, Y0
	VFMADD231PD 32(DI), Y5, Y1
	VFMADD231PD 64(DI), Y6, Y2
	VFMADD231PD 96(DI), Y7, Y3
	ADDQ        $128, SI
	ADDQ        $128, DI
	SUBQ        $16, CX
	CMPQ        CX, $16
	JGE         dotloop

dotreduce:
	VADDPD       Y1, Y0, Y0
	VADDPD       Y3, Y2, Y2
	VADDPD       Y2, Y0, Y0
	VEXTRACTF128 $1, Y0, X1
	VADDPD       X1, X0, X0
	VPERMILPD    $1, X0, X1
	VADDSD       X1, X0, X0
	TESTQ        CX, CX
	JEQ          dotdone

dottail:
	VMOVSD      0(SI), X1
	VFMADD231SD 0(DI), X1, X0
	ADDQ        $8, SI
	ADDQ        $8, DI
	DECQ        CX
	JNZ         dottail

dotdone:
	VMOVSD     X0, ret+24(FP)
	VZEROUPPER
	RET

// func axpyAsm(n int, alpha float64, x, y *float64)
//
// y_i += alpha·x_i with fused multiply-adds, 16 entries a step, then one
// by one.
TEXT ·axpyAsm(SB), NOSPLIT, $0-32
	MOVQ         n+0(FP), CX
	VBROADCASTSD alpha+8(FP), Y15
	MOVQ         x+16(FP), SI
	MOVQ         y+24(FP), DI
	CMPQ         CX, $16
	JLT          axpytail0

axpyloop:
	VMOVUPD     0(DI), Y0
	VMOVUPD     32(DI), Y1
	VMOVUPD     64(DI), Y2
	VMOVUPD     96(DI), Y3
	VFMADD231PD 0(SI), Y15, Y0
	VFMADD231PD 32(SI), Y15, Y1
	VFMADD231PD 64(SI), Y15, Y2
	VFMADD231PD 96(SI), Y15, Y3
	VMOVUPD     Y0, 0(DI)
	VMOVUPD     Y1, 32(DI)
	VMOVUPD     Y2, 64(DI)
	VMOVUPD     Y3, 96(DI)
	ADDQ        $128, SI
	ADDQ        $128, DI
	SUBQ        $16, CX
	CMPQ        CX, $16
	JGE         axpyloop

axpytail0:
	TESTQ CX, CX
	JEQ   axpydone

axpytail:
	VMOVSD      0(DI), X0
	VFMADD231SD 0(SI), X15, X0
	VMOVSD      X0, 0(DI)
	ADDQ        $8, SI
	ADDQ        $8, DI
	DECQ        CX
	JNZ         axpytail

axpydone:
	VZEROUPPER
	RET

// Direct tiles: as the tiles above, but row i of the strip of A is read in
// place at a + i·lda (no packing): AX points at row 0, R9 = lda·8 and
// R10 = 3·lda·8, and AX steps by one entry per l.
#define STEP24D \
	VMOVUPD      0(BX), Z12 \
	VMOVUPD      64(BX), Z13 \
	VMOVUPD      128(BX), Z14 \
	VBROADCASTSD (AX), Z15 \
	VFMADD231PD  Z12, Z15, Z0 \
	VFMADD231PD  Z13, Z15, Z1 \
	VFMADD231PD  Z14, Z15, Z2 \
	VBROADCASTSD (AX)(R9*1), Z15 \
	VFMADD231PD  Z12, Z15, Z3 \
	VFMADD231PD  Z13, Z15, Z4 \
	VFMADD231PD  Z14, Z15, Z5 \
	VBROADCASTSD (AX)(R9*2), Z15 \
	VFMADD231PD  Z12, Z15, Z6 \
	VFMADD231PD  Z13, Z15, Z7 \
	VFMADD231PD  Z14, Z15, Z8 \
	VBROADCASTSD (AX)(R10*1), Z15 \
	VFMADD231PD  Z12, Z15, Z9 \
	VFMADD231PD  Z13, Z15, Z10 \
	VFMADD231PD  Z14, Z15, Z11 \
	ADDQ         $8, AX \
	ADDQ         $192, BX

#define SEPSTEP24D \
	VBROADCASTSD (AX), Z15 \
	VMULPD       0(BX), Z15, Z12 \
	VMULPD       64(BX), Z15, Z13 \
	VMULPD       128(BX), Z15, Z14 \
	VADDPD       Z12, Z0, Z0 \
	VADDPD       Z13, Z1, Z1 \
	VADDPD       Z14, Z2, Z2 \
	VBROADCASTSD (AX)(R9*1), Z15 \
	VMULPD       0(BX), Z15, Z12 \
	VMULPD       64(BX), Z15, Z13 \
	VMULPD       128(BX), Z15, Z14 \
	VADDPD       Z12, Z3, Z3 \
	VADDPD       Z13, Z4, Z4 \
	VADDPD       Z14, Z5, Z5 \
	VBROADCASTSD (AX)(R9*2), Z15 \
	VMULPD       0(BX), Z15, Z12 \
	VMULPD       64(BX), Z15, Z13 \
	VMULPD       128(BX), Z15, Z14 \
	VADDPD       Z12, Z6, Z6 \
	VADDPD       Z13, Z7, Z7 \
	VADDPD       Z14, Z8, Z8 \
	VBROADCASTSD (AX)(R10*1), Z15 \
	VMULPD       0(BX), Z15, Z12 \
	VMULPD       64(BX), Z15, Z13 \
	VMULPD       128(BX), Z15, Z14 \
	VADDPD       Z12, Z9, Z9 \
	VADDPD       Z13, Z10, Z10 \
	VADDPD       Z14, Z11, Z11 \
	ADDQ         $8, AX \
	ADDQ         $192, BX

// func tile4x24D(kc int, a *float64, lda int, b, c *float64, ldc int)
TEXT ·tile4x24D(SB), NOSPLIT, $0-48
	MOVQ kc+0(FP), CX
	MOVQ a+8(FP), AX
	MOVQ lda+16(FP), R9
	SHLQ $3, R9
	LEAQ (R9)(R9*2), R10
	MOVQ b+24(FP), BX
	MOVQ c+32(FP), DI
	MOVQ ldc+40(FP), SI
	SHLQ $3, SI
	START24
	TESTQ CX, CX
	JEQ   store24d

loop24d:
	STEP24D
	DECQ CX
	JNZ  loop24d

store24d:
	ROW24(Z0, Z1, Z2)
	ROW24(Z3, Z4, Z5)
	ROW24(Z6, Z7, Z8)
	ROW24(Z9, Z10, Z11)
	VZEROUPPER
	RET

// func tile4x24SepD(kc int, a *float64, lda int, b, c *float64, ldc int)
TEXT ·tile4x24SepD(SB), NOSPLIT, $0-48
	MOVQ kc+0(FP), CX
	MOVQ a+8(FP), AX
	MOVQ lda+16(FP), R9
	SHLQ $3, R9
	LEAQ (R9)(R9*2), R10
	MOVQ b+24(FP), BX
	MOVQ c+32(FP), DI
	MOVQ ldc+40(FP), SI
	SHLQ $3, SI
	START24
	TESTQ CX, CX
	JEQ   sepstore24d

seploop24d:
	SEPSTEP24D
	DECQ CX
	JNZ  seploop24d

sepstore24d:
	ROW24(Z0, Z1, Z2)
	ROW24(Z3, Z4, Z5)
	ROW24(Z6, Z7, Z8)
	ROW24(Z9, Z10, Z11)
	VZEROUPPER
	RET

#define STEP12D \
	VMOVUPD      0(BX), Y12 \
	VMOVUPD      32(BX), Y13 \
	VMOVUPD      64(BX), Y14 \
	VBROADCASTSD (AX), Y15 \
	VFMADD231PD  Y12, Y15, Y0 \
	VFMADD231PD  Y13, Y15, Y1 \
	VFMADD231PD  Y14, Y15, Y2 \
	VBROADCASTSD (AX)(R9*1), Y15 \
	VFMADD231PD  Y12, Y15, Y3 \
	VFMADD231PD  Y13, Y15, Y4 \
	VFMADD231PD  Y14, Y15, Y5 \
	VBROADCASTSD (AX)(R9*2), Y15 \
	VFMADD231PD  Y12, Y15, Y6 \
	VFMADD231PD  Y13, Y15, Y7 \
	VFMADD231PD  Y14, Y15, Y8 \
	VBROADCASTSD (AX)(R10*1), Y15 \
	VFMADD231PD  Y12, Y15, Y9 \
	VFMADD231PD  Y13, Y15, Y10 \
	VFMADD231PD  Y14, Y15, Y11 \
	ADDQ         $8, AX \
	ADDQ         $96, BX

#define SEPROW12D(addr, r0, r1, r2) \
	VBROADCASTSD addr, Y15 \
	VMULPD       0(BX), Y15, Y12 \
	VMULPD       32(BX), Y15, Y13 \
	VMULPD       64(BX), Y15, Y14 \
	VADDPD       Y12, r0, r0 \
	VADDPD       Y13, r1, r1 \
	VADDPD       Y14, r2, r2

#define START12 \
	MOVQ       DI, R8 \
	PREFETCHT0 0(R8) \
	PREFETCHT0 95(R8) \
	ADDQ       SI, R8 \
	PREFETCHT0 0(R8) \
	PREFETCHT0 95(R8) \
	ADDQ       SI, R8 \
	PREFETCHT0 0(R8) \
	PREFETCHT0 95(R8) \
	ADDQ       SI, R8 \
	PREFETCHT0 0(R8) \
	PREFETCHT0 95(R8) \
	VXORPD     Y0, Y0, Y0 \
	VXORPD     Y1, Y1, Y1 \
	VXORPD     Y2, Y2, Y2 \
	VXORPD     Y3, Y3, Y3 \
	VXORPD     Y4, Y4, Y4 \
	VXORPD     Y5, Y5, Y5 \
	VXORPD     Y6, Y6, Y6 \
	VXORPD     Y7, Y7, Y7 \
	VXORPD     Y8, Y8, Y8 \
	VXORPD     Y9, Y9, Y9 \
	VXORPD     Y10, Y10, Y10 \
	VXORPD     Y11, Y11, Y11

// func tile4x12D(kc int, a *float64, lda int, b, c *float64, ldc int)
TEXT ·tile4x12D(SB), NOSPLIT, $0-48
	MOVQ kc+0(FP), CX
	MOVQ a+8(FP), AX
	MOVQ lda+16(FP), R9
	SHLQ $3, R9
	LEAQ (R9)(R9*2), R10
	MOVQ b+24(FP), BX
	MOVQ c+32(FP), DI
	MOVQ ldc+40(FP), SI
	SHLQ $3, SI
	START12
	TESTQ CX, CX
	JEQ   store12d

loop12d:
	STEP12D
	DECQ CX
	JNZ  loop12d

store12d:
	ROW(Y0, Y1, Y2)
	ROW(Y3, Y4, Y5)
	ROW(Y6, Y7, Y8)
	ROW(Y9, Y10, Y11)
	VZEROUPPER
	RET

// func tile4x12SepD(kc int, a *float64, lda int, b, c *float64, ldc int)
TEXT ·tile4x12SepD(SB), NOSPLIT, $0-48
	MOVQ kc+0(FP), CX
	MOVQ a+8(FP), AX
	MOVQ lda+16(FP), R9
	SHLQ $3, R9
	LEAQ (R9)(R9*2), R10
	MOVQ b+24(FP), BX
	MOVQ c+32(FP), DI
	MOVQ ldc+40(FP), SI
	SHLQ $3, SI
	START12
	TESTQ CX, CX
	JEQ   sepstore12d

seploop12d:
	SEPROW12D((AX), Y0, Y1, Y2)
	SEPROW12D((AX)(R9*1), Y3, Y4, Y5)
	SEPROW12D((AX)(R9*2), Y6, Y7, Y8)
	SEPROW12D((AX)(R10*1), Y9, Y10, Y11)
	ADDQ $8, AX
	ADDQ $96, BX
	DECQ CX
	JNZ  seploop12d

sepstore12d:
	ROW(Y0, Y1, Y2)
	ROW(Y3, Y4, Y5)
	ROW(Y6, Y7, Y8)
	ROW(Y9, Y10, Y11)
	VZEROUPPER
	RET
