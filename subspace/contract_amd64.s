//go:build amd64 && !purego

#include "textflag.h"

// The contraction kernels (contract_kernel.go states what each computes
// and in which order; dotRowsGo and axpyRowsGo are the same sums in Go).
// Every product is rounded (VMULPD) and then added (VADDPD): no fused
// multiply-add, so the results are those of the portable code, bit for
// bit. Only AVX instructions are used (the callers require AVX2 and FMA,
// a superset, through internal/cpufeat).

// func dotRows4(rows, n4 int, a *float64, lda int, y, out *float64)
//
// For r < rows (a multiple of 4) and n4 (a positive multiple of 4):
// out[r] = (l0 + l1) + (l2 + l3), where lane q sums the products
// a[r·lda + j]·y[j] over j < n4, j ≡ q mod 4, in order of j from zero.
// Four rows at a time, one accumulator each; the y vector is loaded once
// for the four rows.
TEXT ·dotRows4(SB), NOSPLIT, $0-48
	MOVQ rows+0(FP), CX
	MOVQ n4+8(FP), DX
	MOVQ a+16(FP), SI
	MOVQ lda+24(FP), R8
	MOVQ y+32(FP), DI
	MOVQ out+40(FP), R9
	SHLQ $3, R8
	SHLQ $3, DX

dr4rows:
	MOVQ   SI, R10
	LEAQ   (SI)(R8*1), R11
	LEAQ   (R11)(R8*1), R12
	LEAQ   (R12)(R8*1), R13
	VXORPD Y0, Y0, Y0
	VXORPD Y1, Y1, Y1
	VXORPD Y2, Y2, Y2
	VXORPD Y3, Y3, Y3
	XORQ   BX, BX

dr4cols:
	VMOVUPD (DI)(BX*1), Y4
	VMULPD  (R10)(BX*1), Y4, Y5
	VMULPD  (R11)(BX*1), Y4, Y6
	VMULPD  (R12)(BX*1), Y4, Y7
	VMULPD  (R13)(BX*1), Y4, Y8
	VADDPD  Y5, Y0, Y0
	VADDPD  Y6, Y1, Y1
	VADDPD  Y7, Y2, Y2
	VADDPD  Y8, Y3, Y3
	ADDQ    $32, BX
	CMPQ    BX, DX
	JLT     dr4cols

	// Y0 = [r0 l0+l1, r1 l0+l1, r0 l2+l3, r1 l2+l3], Y2 likewise for r2, r3.
	VHADDPD    Y1, Y0, Y0
	VHADDPD    Y3, Y2, Y2
	VPERM2F128 $0x20, Y2, Y0, Y4
	VPERM2F128 $0x31, Y2, Y0, Y5
	VADDPD     Y5, Y4, Y4
	VMOVUPD    Y4, (R9)
	ADDQ       $32, R9
	LEAQ       (R13)(R8*1), SI
	SUBQ       $4, CX
	JGT        dr4rows
	VZEROUPPER
	RET

// One row step of axpyRowsAcc over k registers of accumulators: the
// weight x_i broadcast into Y15, each product rounded, then added.
#define PROD(off, acc, tmp) \
	VMULPD off(R11), Y15, tmp \
	VADDPD tmp, acc, acc

// func axpyRowsAcc(m, nc int, x, a *float64, lda int, out *float64)
//
// For j < nc (a positive multiple of 4) and m ≥ 1:
// out[j] = (…((out[j] + x_0·a[j]) + x_1·a[lda + j]) + …) + x_{m−1}·a[(m−1)·lda + j],
// each product rounded and then added, in order of i. The columns go in
// chunks of 32 (eight accumulators), then 16, then 4; each chunk runs
// down all m rows with its accumulators in registers.
TEXT ·axpyRowsAcc(SB), NOSPLIT, $0-48
	MOVQ m+0(FP), CX
	MOVQ nc+8(FP), DX
	MOVQ x+16(FP), DI
	MOVQ a+24(FP), SI
	MOVQ lda+32(FP), R8
	MOVQ out+40(FP), R9
	SHLQ $3, R8

ax32:
	CMPQ    DX, $32
	JLT     ax16
	VMOVUPD 0(R9), Y0
	VMOVUPD 32(R9), Y1
	VMOVUPD 64(R9), Y2
	VMOVUPD 96(R9), Y3
	VMOVUPD 128(R9), Y4
	VMOVUPD 160(R9), Y5
	VMOVUPD 192(R9), Y6
	VMOVUPD 224(R9), Y7
	MOVQ    DI, R10
	MOVQ    SI, R11
	MOVQ    CX, BX

ax32rows:
	VBROADCASTSD (R10), Y15
	PROD(0, Y0, Y8)
	PROD(32, Y1, Y9)
	PROD(64, Y2, Y10)
	PROD(96, Y3, Y11)
	PROD(128, Y4, Y12)
	PROD(160, Y5, Y13)
	PROD(192, Y6, Y14)
	PROD(224, Y7, Y8)
	ADDQ         $8, R10
	ADDQ         R8, R11
	DECQ         BX
	JNZ          ax32rows
	VMOVUPD      Y0, 0(R9)
	VMOVUPD      Y1, 32(R9)
	VMOVUPD      Y2, 64(R9)
	VMOVUPD      Y3, 96(R9)
	VMOVUPD      Y4, 128(R9)
	VMOVUPD      Y5, 160(R9)
	VMOVUPD      Y6, 192(R9)
	VMOVUPD      Y7, 224(R9)
	ADDQ         $256, R9
	ADDQ         $256, SI
	SUBQ         $32, DX
	JMP          ax32

ax16:
	CMPQ    DX, $16
	JLT     ax4
	VMOVUPD 0(R9), Y0
	VMOVUPD 32(R9), Y1
	VMOVUPD 64(R9), Y2
	VMOVUPD 96(R9), Y3
	MOVQ    DI, R10
	MOVQ    SI, R11
	MOVQ    CX, BX

ax16rows:
	VBROADCASTSD (R10), Y15
	PROD(0, Y0, Y8)
	PROD(32, Y1, Y9)
	PROD(64, Y2, Y10)
	PROD(96, Y3, Y11)
	ADDQ         $8, R10
	ADDQ         R8, R11
	DECQ         BX
	JNZ          ax16rows
	VMOVUPD      Y0, 0(R9)
	VMOVUPD      Y1, 32(R9)
	VMOVUPD      Y2, 64(R9)
	VMOVUPD      Y3, 96(R9)
	ADDQ         $128, R9
	ADDQ         $128, SI
	SUBQ         $16, DX

ax4:
	CMPQ    DX, $4
	JLT     axdone
	VMOVUPD 0(R9), Y0
	MOVQ    DI, R10
	MOVQ    SI, R11
	MOVQ    CX, BX

ax4rows:
	VBROADCASTSD (R10), Y15
	PROD(0, Y0, Y8)
	ADDQ         $8, R10
	ADDQ         R8, R11
	DECQ         BX
	JNZ          ax4rows
	VMOVUPD      Y0, 0(R9)
	ADDQ         $32, R9
	ADDQ         $32, SI
	SUBQ         $4, DX
	JMP          ax4

axdone:
	VZEROUPPER
	RET

// One step t of gramTile4x8: a's four entries broadcast, b's eight in
// two registers, eight fused multiply-adds into Y0–Y7.
#define GSTEP(areg, lo, hi) \
	VFMADD231PD Y8, areg, lo \
	VFMADD231PD Y9, areg, hi

// func gramTile4x8(s int, a, b *float64, ld int, c *float64, ldc int)
//
// For i < 4, j < 8 and s ≥ 1: c[i·ldc + j] = Σ_{t<s} a[t·ld + i]·b[t·ld + j],
// each sum accumulated in order of t from zero with fused multiply-adds
// (math.FMA in gramTileGo), then stored (not added).
TEXT ·gramTile4x8(SB), NOSPLIT, $0-48
	MOVQ   s+0(FP), CX
	MOVQ   a+8(FP), SI
	MOVQ   b+16(FP), DI
	MOVQ   ld+24(FP), R8
	MOVQ   c+32(FP), R9
	MOVQ   ldc+40(FP), R10
	SHLQ   $3, R8
	SHLQ   $3, R10
	VXORPD Y0, Y0, Y0
	VXORPD Y1, Y1, Y1
	VXORPD Y2, Y2, Y2
	VXORPD Y3, Y3, Y3
	VXORPD Y4, Y4, Y4
	VXORPD Y5, Y5, Y5
	VXORPD Y6, Y6, Y6
	VXORPD Y7, Y7, Y7

gtloop:
	VMOVUPD      (DI), Y8
	VMOVUPD      32(DI), Y9
	VBROADCASTSD (SI), Y10
	VBROADCASTSD 8(SI), Y11
	VBROADCASTSD 16(SI), Y12
	VBROADCASTSD 24(SI), Y13
	GSTEP(Y10, Y0, Y1)
	GSTEP(Y11, Y2, Y3)
	GSTEP(Y12, Y4, Y5)
	GSTEP(Y13, Y6, Y7)
	ADDQ         R8, SI
	ADDQ         R8, DI
	DECQ         CX
	JNZ          gtloop

	VMOVUPD Y0, (R9)
	VMOVUPD Y1, 32(R9)
	ADDQ    R10, R9
	VMOVUPD Y2, (R9)
	VMOVUPD Y3, 32(R9)
	ADDQ    R10, R9
	VMOVUPD Y4, (R9)
	VMOVUPD Y5, 32(R9)
	ADDQ    R10, R9
	VMOVUPD Y6, (R9)
	VMOVUPD Y7, 32(R9)
	VZEROUPPER
	RET
