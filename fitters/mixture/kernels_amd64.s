//go:build amd64 && !purego

#include "textflag.h"

// The two kernels of kernels_amd64.go, four rows per 256-bit register.
// Every lane goes through exactly the floating-point operations, in the
// same order, of the scalar Go code they replace (kernels.go), so the
// results are bit-identical to it.

// Constants of math.Exp's amd64 implementation (math/exp_amd64.s, the FMA
// path), each repeated in all four lanes by VBROADCASTSD.
DATA expconst<>+0(SB)/8, $1.4426950408889634073599246810018920  // LOG2E
DATA expconst<>+8(SB)/8, $0.69314718055966295651160180568695068359375 // LN2U
DATA expconst<>+16(SB)/8, $0.28235290563031577122588448175013436025525412068e-12 // LN2L
DATA expconst<>+24(SB)/8, $0.0625
DATA expconst<>+32(SB)/8, $2.4801587301587301587e-5
DATA expconst<>+40(SB)/8, $1.9841269841269841270e-4
DATA expconst<>+48(SB)/8, $1.3888888888888888889e-3
DATA expconst<>+56(SB)/8, $8.3333333333333333333e-3
DATA expconst<>+64(SB)/8, $4.1666666666666666667e-2
DATA expconst<>+72(SB)/8, $1.6666666666666666667e-1
DATA expconst<>+80(SB)/8, $0.5
DATA expconst<>+88(SB)/8, $1.0
DATA expconst<>+96(SB)/8, $2.0
DATA expconst<>+104(SB)/8, $1023
GLOBL expconst<>+0(SB), RODATA, $112

// func expFMA4(dst, src *float64, n int)
//
// dst[i] = exp(src[i]) for i < n (n a multiple of 4) by the algorithm and
// the operations of math.Exp's FMA path, valid for src[i] in [-708, 708]:
// outside that range (and for NaN) a lane's value is meaningless and the
// caller recomputes it.
TEXT ·expFMA4(SB), NOSPLIT, $0-24
	MOVQ dst+0(FP), DI
	MOVQ src+8(FP), SI
	MOVQ n+16(FP), CX
	VBROADCASTSD expconst<>+0(SB), Y8   // LOG2E
	VBROADCASTSD expconst<>+8(SB), Y9   // LN2U
	VBROADCASTSD expconst<>+16(SB), Y10 // LN2L
	VBROADCASTSD expconst<>+24(SB), Y11 // 1/16
	VBROADCASTSD expconst<>+96(SB), Y12 // 2
	VBROADCASTSD expconst<>+88(SB), Y13 // 1
	VPBROADCASTQ expconst<>+104(SB), Y14 // exponent bias 1023 (int64)
	XORQ AX, AX

expLoop:
	CMPQ AX, CX
	JGE  expDone
	VMOVUPD (SI)(AX*8), Y0
	VMULPD  Y8, Y0, Y1          // x·log2(e)
	VCVTPD2DQY Y1, X2           // n = round to nearest even
	VCVTDQ2PD X2, Y1            // float64(n)
	VFNMADD231PD Y9, Y1, Y0     // x − n·LN2U (fused)
	VFNMADD231PD Y10, Y1, Y0    // − n·LN2L (fused)
	VMULPD  Y11, Y0, Y0         // /16
	VBROADCASTSD expconst<>+32(SB), Y1
	VBROADCASTSD expconst<>+40(SB), Y3
	VFMADD213PD Y3, Y0, Y1      // p = p·x + c (fused), Taylor terms down to 1/2
	VBROADCASTSD expconst<>+48(SB), Y3
	VFMADD213PD Y3, Y0, Y1
	VBROADCASTSD expconst<>+56(SB), Y3
	VFMADD213PD Y3, Y0, Y1
	VBROADCASTSD expconst<>+64(SB), Y3
	VFMADD213PD Y3, Y0, Y1
	VBROADCASTSD expconst<>+72(SB), Y3
	VFMADD213PD Y3, Y0, Y1
	VBROADCASTSD expconst<>+80(SB), Y3
	VFMADD213PD Y3, Y0, Y1
	VFMADD213PD Y13, Y0, Y1     // + 1
	VMULPD  Y1, Y0, Y0          // x·p
	VADDPD  Y12, Y0, Y1         // four squarings: x·(x+2)
	VMULPD  Y1, Y0, Y0
	VADDPD  Y12, Y0, Y1
	VMULPD  Y1, Y0, Y0
	VADDPD  Y12, Y0, Y1
	VMULPD  Y1, Y0, Y0
	VADDPD  Y12, Y0, Y1
	VFMADD213PD Y13, Y1, Y0     // x·(x+2) + 1 (fused)
	VPMOVSXDQ X2, Y4            // 2^n: (n + 1023) << 52
	VPADDQ  Y14, Y4, Y4
	VPSLLQ  $52, Y4, Y4
	VMULPD  Y4, Y0, Y0
	VMOVUPD Y0, (DI)(AX*8)
	ADDQ    $4, AX
	JMP     expLoop

expDone:
	VZEROUPPER
	RET

// func whitenColumn4(yi, y, li *float64, nj, n int, s float64, d2 *float64, first bool)
//
// For r < n (a multiple of 4): v = yi[r]; v = v − li[j]·y[j·128+r] for
// j = 0..nj−1 in order (multiply, then subtract: not fused); v = v·s;
// yi[r] = v; d2[r] = v·v when first, else d2[r] + v·v. Sixteen rows per
// pass while at least sixteen remain, then four.
TEXT ·whitenColumn4(SB), NOSPLIT, $0-57
	MOVQ yi+0(FP), DI
	MOVQ y+8(FP), SI
	MOVQ li+16(FP), DX
	MOVQ nj+24(FP), CX
	MOVQ n+32(FP), BX
	VBROADCASTSD s+40(FP), Y15
	MOVQ d2+48(FP), R8
	MOVBLZX first+56(FP), R9
	XORQ AX, AX

rows16:
	MOVQ BX, R10
	SUBQ AX, R10
	CMPQ R10, $16
	JLT  rows4
	VMOVUPD (DI)(AX*8), Y0
	VMOVUPD 32(DI)(AX*8), Y1
	VMOVUPD 64(DI)(AX*8), Y2
	VMOVUPD 96(DI)(AX*8), Y3
	LEAQ (SI)(AX*8), R11
	XORQ R12, R12

cols16:
	CMPQ R12, CX
	JGE  scale16
	VBROADCASTSD (DX)(R12*8), Y4
	VMULPD (R11), Y4, Y5
	VMULPD 32(R11), Y4, Y6
	VMULPD 64(R11), Y4, Y7
	VMULPD 96(R11), Y4, Y8
	VSUBPD Y5, Y0, Y0
	VSUBPD Y6, Y1, Y1
	VSUBPD Y7, Y2, Y2
	VSUBPD Y8, Y3, Y3
	ADDQ $1024, R11
	INCQ R12
	JMP  cols16

scale16:
	VMULPD Y15, Y0, Y0
	VMULPD Y15, Y1, Y1
	VMULPD Y15, Y2, Y2
	VMULPD Y15, Y3, Y3
	VMOVUPD Y0, (DI)(AX*8)
	VMOVUPD Y1, 32(DI)(AX*8)
	VMOVUPD Y2, 64(DI)(AX*8)
	VMOVUPD Y3, 96(DI)(AX*8)
	VMULPD Y0, Y0, Y0
	VMULPD Y1, Y1, Y1
	VMULPD Y2, Y2, Y2
	VMULPD Y3, Y3, Y3
	TESTQ R9, R9
	JNZ   store16
	VADDPD (R8)(AX*8), Y0, Y0
	VADDPD 32(R8)(AX*8), Y1, Y1
	VADDPD 64(R8)(AX*8), Y2, Y2
	VADDPD 96(R8)(AX*8), Y3, Y3

store16:
	VMOVUPD Y0, (R8)(AX*8)
	VMOVUPD Y1, 32(R8)(AX*8)
	VMOVUPD Y2, 64(R8)(AX*8)
	VMOVUPD Y3, 96(R8)(AX*8)
	ADDQ $16, AX
	JMP  rows16

rows4:
	CMPQ AX, BX
	JGE  whitenDone
	VMOVUPD (DI)(AX*8), Y0
	LEAQ (SI)(AX*8), R11
	XORQ R12, R12

cols4:
	CMPQ R12, CX
	JGE  scale4
	VBROADCASTSD (DX)(R12*8), Y4
	VMULPD (R11), Y4, Y5
	VSUBPD Y5, Y0, Y0
	ADDQ $1024, R11
	INCQ R12
	JMP  cols4

scale4:
	VMULPD Y15, Y0, Y0
	VMOVUPD Y0, (DI)(AX*8)
	VMULPD Y0, Y0, Y0
	TESTQ R9, R9
	JNZ   store4
	VADDPD (R8)(AX*8), Y0, Y0

store4:
	VMOVUPD Y0, (R8)(AX*8)
	ADDQ $4, AX
	JMP  rows4

whitenDone:
	VZEROUPPER
	RET
