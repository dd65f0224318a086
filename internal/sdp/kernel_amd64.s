//go:build amd64 && !purego

#include "textflag.h"

// func tile4x12(kc int, a, b, c *float64, ldc int)
//
// c[i·ldc + j] −= Σ_{l<kc} a[4l + i]·b[12l + j] for i < 4, j < 12: the sums
// are accumulated in twelve AVX2 registers (one row of the tile in three),
// with fused multiply-adds, then subtracted from c.
TEXT ·tile4x12(SB), NOSPLIT, $0-40
	MOVQ kc+0(FP), CX
	MOVQ a+8(FP), AX
	MOVQ b+16(FP), BX
	MOVQ c+24(FP), DI
	MOVQ ldc+32(FP), SI
	SHLQ $3, SI
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
	JEQ   store

loop:
	VMOVUPD      0(BX), Y12
	VMOVUPD      32(BX), Y13
	VMOVUPD      64(BX), Y14
	VBROADCASTSD 0(AX), Y15
	VFMADD231PD  Y12, Y15, Y0
	VFMADD231PD  Y13, Y15, Y1
	VFMADD231PD  Y14, Y15, Y2
	VBROADCASTSD 8(AX), Y15
	VFMADD231PD  Y12, Y15, Y3
	VFMADD231PD  Y13, Y15, Y4
	VFMADD231PD  Y14, Y15, Y5
	VBROADCASTSD 16(AX), Y15
	VFMADD231PD  Y12, Y15, Y6
	VFMADD231PD  Y13, Y15, Y7
	VFMADD231PD  Y14, Y15, Y8
	VBROADCASTSD 24(AX), Y15
	VFMADD231PD  Y12, Y15, Y9
	VFMADD231PD  Y13, Y15, Y10
	VFMADD231PD  Y14, Y15, Y11
	ADDQ         $32, AX
	ADDQ         $96, BX
	DECQ         CX
	JNZ          loop

store:
	VMOVUPD 0(DI), Y12
	VMOVUPD 32(DI), Y13
	VMOVUPD 64(DI), Y14
	VSUBPD  Y0, Y12, Y12
	VSUBPD  Y1, Y13, Y13
	VSUBPD  Y2, Y14, Y14
	VMOVUPD Y12, 0(DI)
	VMOVUPD Y13, 32(DI)
	VMOVUPD Y14, 64(DI)
	ADDQ    SI, DI
	VMOVUPD 0(DI), Y12
	VMOVUPD 32(DI), Y13
	VMOVUPD 64(DI), Y14
	VSUBPD  Y3, Y12, Y12
	VSUBPD  Y4, Y13, Y13
	VSUBPD  Y5, Y14, Y14
	VMOVUPD Y12, 0(DI)
	VMOVUPD Y13, 32(DI)
	VMOVUPD Y14, 64(DI)
	ADDQ    SI, DI
	VMOVUPD 0(DI), Y12
	VMOVUPD 32(DI), Y13
	VMOVUPD 64(DI), Y14
	VSUBPD  Y6, Y12, Y12
	VSUBPD  Y7, Y13, Y13
	VSUBPD  Y8, Y14, Y14
	VMOVUPD Y12, 0(DI)
	VMOVUPD Y13, 32(DI)
	VMOVUPD Y14, 64(DI)
	ADDQ    SI, DI
	VMOVUPD 0(DI), Y12
	VMOVUPD 32(DI), Y13
	VMOVUPD 64(DI), Y14
	VSUBPD  Y9, Y12, Y12
	VSUBPD  Y10, Y13, Y13
	VSUBPD  Y11, Y14, Y14
	VMOVUPD Y12, 0(DI)
	VMOVUPD Y13, 32(DI)
	VMOVUPD Y14, 64(DI)
	VZEROUPPER
	RET

// func pairDots(rec, rev *float64, ps, qs *int32, vs, out *float64, n int)
//
// out[f] = vs[f]·Σ_{j<8} rec[8p+j]·rev[8q+j] for f < n, p = ps[f], q = qs[f]:
// two products of four lanes per entry, summed horizontally two entries at
// a time.
TEXT ·pairDots(SB), NOSPLIT, $0-56
	MOVQ rec+0(FP), SI
	MOVQ rev+8(FP), DI
	MOVQ ps+16(FP), R8
	MOVQ qs+24(FP), R9
	MOVQ vs+32(FP), R10
	MOVQ out+40(FP), R11
	MOVQ n+48(FP), CX
	XORQ DX, DX
	MOVQ CX, R12
	ANDQ $-2, R12
	CMPQ DX, R12
	JGE  single

pair:
	MOVLQSX      (R8)(DX*4), AX
	MOVLQSX      (R9)(DX*4), BX
	SHLQ         $6, AX
	SHLQ         $6, BX
	VMOVUPD      (SI)(AX*1), Y0
	VMOVUPD      32(SI)(AX*1), Y1
	VMULPD       (DI)(BX*1), Y0, Y0
	VFMADD231PD  32(DI)(BX*1), Y1, Y0
	MOVLQSX      4(R8)(DX*4), AX
	MOVLQSX      4(R9)(DX*4), BX
	SHLQ         $6, AX
	SHLQ         $6, BX
	VMOVUPD      (SI)(AX*1), Y2
	VMOVUPD      32(SI)(AX*1), Y3
	VMULPD       (DI)(BX*1), Y2, Y2
	VFMADD231PD  32(DI)(BX*1), Y3, Y2
	VHADDPD      Y2, Y0, Y0
	VEXTRACTF128 $1, Y0, X1
	VADDPD       X1, X0, X0
	VMULPD       (R10)(DX*8), X0, X0
	VMOVUPD      X0, (R11)(DX*8)
	ADDQ         $2, DX
	CMPQ         DX, R12
	JLT          pair

single:
	CMPQ         DX, CX
	JGE          done
	MOVLQSX      (R8)(DX*4), AX
	MOVLQSX      (R9)(DX*4), BX
	SHLQ         $6, AX
	SHLQ         $6, BX
	VMOVUPD      (SI)(AX*1), Y0
	VMOVUPD      32(SI)(AX*1), Y1
	VMULPD       (DI)(BX*1), Y0, Y0
	VFMADD231PD  32(DI)(BX*1), Y1, Y0
	VEXTRACTF128 $1, Y0, X1
	VADDPD       X1, X0, X0
	VHADDPD      X0, X0, X0
	VMULSD       (R10)(DX*8), X0, X0
	VMOVSD       X0, (R11)(DX*8)

done:
	VZEROUPPER
	RET
