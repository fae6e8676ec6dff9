#include "textflag.h"

// func tile4x8(dst *float64, ldd int, x *float64, ldx int, a *float64, lda int, k int)
//
// dst[i][c] = sum_{j<k} x[i][j] * a[j][c] for rows i in [0, 4) and columns c
// in [0, 8) (strides ldd, ldx and lda in elements): every sum starts at +0
// and adds the rounded products in ascending j (VMULPD then VADDPD, never
// fused), the arithmetic of gonum's Dgemm. Needs AVX2.
TEXT ·tile4x8(SB), NOSPLIT, $0-56
	MOVQ dst+0(FP), DI
	MOVQ ldd+8(FP), R8
	MOVQ x+16(FP), SI
	MOVQ ldx+24(FP), R9
	MOVQ a+32(FP), DX
	MOVQ lda+40(FP), R10
	MOVQ k+48(FP), CX
	SHLQ $3, R8
	SHLQ $3, R9
	SHLQ $3, R10
	LEAQ (SI)(R9*1), R11
	LEAQ (R11)(R9*1), R12
	LEAQ (R12)(R9*1), R13
	VXORPD Y0, Y0, Y0
	VXORPD Y1, Y1, Y1
	VXORPD Y2, Y2, Y2
	VXORPD Y3, Y3, Y3
	VXORPD Y4, Y4, Y4
	VXORPD Y5, Y5, Y5
	VXORPD Y6, Y6, Y6
	VXORPD Y7, Y7, Y7
	TESTQ CX, CX
	JE    store

loop:
	VMOVUPD      (DX), Y8
	VMOVUPD      32(DX), Y9
	VBROADCASTSD (SI), Y10
	VMULPD       Y8, Y10, Y11
	VADDPD       Y11, Y0, Y0
	VMULPD       Y9, Y10, Y12
	VADDPD       Y12, Y1, Y1
	VBROADCASTSD (R11), Y13
	VMULPD       Y8, Y13, Y14
	VADDPD       Y14, Y2, Y2
	VMULPD       Y9, Y13, Y15
	VADDPD       Y15, Y3, Y3
	VBROADCASTSD (R12), Y10
	VMULPD       Y8, Y10, Y11
	VADDPD       Y11, Y4, Y4
	VMULPD       Y9, Y10, Y12
	VADDPD       Y12, Y5, Y5
	VBROADCASTSD (R13), Y13
	VMULPD       Y8, Y13, Y14
	VADDPD       Y14, Y6, Y6
	VMULPD       Y9, Y13, Y15
	VADDPD       Y15, Y7, Y7
	ADDQ         $8, SI
	ADDQ         $8, R11
	ADDQ         $8, R12
	ADDQ         $8, R13
	ADDQ         R10, DX
	DECQ         CX
	JNZ          loop

store:
	VMOVUPD Y0, (DI)
	VMOVUPD Y1, 32(DI)
	ADDQ    R8, DI
	VMOVUPD Y2, (DI)
	VMOVUPD Y3, 32(DI)
	ADDQ    R8, DI
	VMOVUPD Y4, (DI)
	VMOVUPD Y5, 32(DI)
	ADDQ    R8, DI
	VMOVUPD Y6, (DI)
	VMOVUPD Y7, 32(DI)
	VZEROUPPER
	RET

// func sq8(dst *float64, z *float64, ldz int, c *float64, k int)
//
// dst[i] = sum_{j<k} (c[j] * z[j][i])^2 for i in [0, 8) (row stride ldz in
// elements): every sum starts at +0 and adds, in ascending j, the square
// of the rounded product, itself rounded (VMULPD, VMULPD, VADDPD, never
// fused): the arithmetic of q := c*v; s += q*q compiled for amd64. Needs
// AVX2.
TEXT ·sq8(SB), NOSPLIT, $0-40
	MOVQ   dst+0(FP), DI
	MOVQ   z+8(FP), SI
	MOVQ   ldz+16(FP), R8
	MOVQ   c+24(FP), DX
	MOVQ   k+32(FP), CX
	SHLQ   $3, R8
	VXORPD Y0, Y0, Y0
	VXORPD Y1, Y1, Y1
	TESTQ  CX, CX
	JE     sqstore

sqloop:
	VBROADCASTSD (DX), Y2
	VMULPD       (SI), Y2, Y3
	VMULPD       32(SI), Y2, Y4
	VMULPD       Y3, Y3, Y3
	VMULPD       Y4, Y4, Y4
	VADDPD       Y3, Y0, Y0
	VADDPD       Y4, Y1, Y1
	ADDQ         $8, DX
	ADDQ         R8, SI
	DECQ         CX
	JNZ          sqloop

sqstore:
	VMOVUPD Y0, (DI)
	VMOVUPD Y1, 32(DI)
	VZEROUPPER
	RET
