//go:build amd64 && !purego && !amd64.v3

#include "textflag.h"

// func mahaRows(out, y, u *float64, d, n, stride int)
//
// For rows r < n (n a multiple of 4), with column l of the block at
// y[l·stride : l·stride+n] and u the packed lower-triangular whitening
// matrix (row j: u[j(j+1)/2 : j(j+1)/2+j+1]):
//
//	maha = 0
//	for j < d: s0..s3 = 0; l = 0
//	    for l+4 ≤ j+1: s0 += u_jl·y_l; s1 += u_j,l+1·y_l+1; s2 += …; s3 += …; l += 4
//	    for l < j+1:   s0 += u_jl·y_l; l++
//	    z = (s0+s1)+(s2+s3); maha += z·z
//	out[r] = maha
//
// which is chunkFull's per-row arithmetic (products rounded before each
// addition), eight rows (two registers) per pass while eight remain, then
// four.
TEXT ·mahaRows(SB), NOSPLIT, $0-48
	MOVQ out+0(FP), R13
	MOVQ y+8(FP), DI
	MOVQ u+16(FP), SI
	MOVQ d+24(FP), CX
	MOVQ n+32(FP), DX
	MOVQ stride+40(FP), BX
	SHLQ $3, BX                 // column stride in bytes
	XORQ AX, AX                 // r

rows8:
	MOVQ DX, R14
	SUBQ AX, R14
	CMPQ R14, $8
	JLT  rows4
	VXORPD Y10, Y10, Y10
	VXORPD Y11, Y11, Y11
	XORQ R8, R8                 // off: start of row j in u
	XORQ R9, R9                 // j

j8:
	CMPQ R9, CX
	JGE  store8
	VXORPD Y0, Y0, Y0
	VXORPD Y1, Y1, Y1
	VXORPD Y2, Y2, Y2
	VXORPD Y3, Y3, Y3
	VXORPD Y4, Y4, Y4
	VXORPD Y5, Y5, Y5
	VXORPD Y6, Y6, Y6
	VXORPD Y7, Y7, Y7
	LEAQ 1(R9), R11             // row length j+1
	XORQ R10, R10               // l
	LEAQ (DI)(AX*8), R12        // column 0, row r
	LEAQ (SI)(R8*8), R15        // u row j

l8quad:
	LEAQ 4(R10), R14
	CMPQ R14, R11
	JGT  l8tail
	VBROADCASTSD (R15)(R10*8), Y8
	VMULPD (R12), Y8, Y9
	VADDPD Y9, Y0, Y0
	VMULPD 32(R12), Y8, Y9
	VADDPD Y9, Y4, Y4
	ADDQ BX, R12
	VBROADCASTSD 8(R15)(R10*8), Y8
	VMULPD (R12), Y8, Y9
	VADDPD Y9, Y1, Y1
	VMULPD 32(R12), Y8, Y9
	VADDPD Y9, Y5, Y5
	ADDQ BX, R12
	VBROADCASTSD 16(R15)(R10*8), Y8
	VMULPD (R12), Y8, Y9
	VADDPD Y9, Y2, Y2
	VMULPD 32(R12), Y8, Y9
	VADDPD Y9, Y6, Y6
	ADDQ BX, R12
	VBROADCASTSD 24(R15)(R10*8), Y8
	VMULPD (R12), Y8, Y9
	VADDPD Y9, Y3, Y3
	VMULPD 32(R12), Y8, Y9
	VADDPD Y9, Y7, Y7
	ADDQ BX, R12
	MOVQ R14, R10
	JMP  l8quad

l8tail:
	CMPQ R10, R11
	JGE  z8
	VBROADCASTSD (R15)(R10*8), Y8
	VMULPD (R12), Y8, Y9
	VADDPD Y9, Y0, Y0
	VMULPD 32(R12), Y8, Y9
	VADDPD Y9, Y4, Y4
	ADDQ BX, R12
	INCQ R10
	JMP  l8tail

z8:
	VADDPD Y1, Y0, Y0           // (s0+s1)
	VADDPD Y3, Y2, Y2           // (s2+s3)
	VADDPD Y2, Y0, Y0           // z
	VMULPD Y0, Y0, Y0
	VADDPD Y0, Y10, Y10         // maha += z·z
	VADDPD Y5, Y4, Y4
	VADDPD Y7, Y6, Y6
	VADDPD Y6, Y4, Y4
	VMULPD Y4, Y4, Y4
	VADDPD Y4, Y11, Y11
	ADDQ R11, R8
	INCQ R9
	JMP  j8

store8:
	VMOVUPD Y10, (R13)(AX*8)
	VMOVUPD Y11, 32(R13)(AX*8)
	ADDQ $8, AX
	JMP  rows8

rows4:
	CMPQ AX, DX
	JGE  done
	VXORPD Y10, Y10, Y10
	XORQ R8, R8
	XORQ R9, R9

j4:
	CMPQ R9, CX
	JGE  store4
	VXORPD Y0, Y0, Y0
	VXORPD Y1, Y1, Y1
	VXORPD Y2, Y2, Y2
	VXORPD Y3, Y3, Y3
	LEAQ 1(R9), R11
	XORQ R10, R10
	LEAQ (DI)(AX*8), R12
	LEAQ (SI)(R8*8), R15

l4quad:
	LEAQ 4(R10), R14
	CMPQ R14, R11
	JGT  l4tail
	VBROADCASTSD (R15)(R10*8), Y8
	VMULPD (R12), Y8, Y9
	VADDPD Y9, Y0, Y0
	ADDQ BX, R12
	VBROADCASTSD 8(R15)(R10*8), Y8
	VMULPD (R12), Y8, Y9
	VADDPD Y9, Y1, Y1
	ADDQ BX, R12
	VBROADCASTSD 16(R15)(R10*8), Y8
	VMULPD (R12), Y8, Y9
	VADDPD Y9, Y2, Y2
	ADDQ BX, R12
	VBROADCASTSD 24(R15)(R10*8), Y8
	VMULPD (R12), Y8, Y9
	VADDPD Y9, Y3, Y3
	ADDQ BX, R12
	MOVQ R14, R10
	JMP  l4quad

l4tail:
	CMPQ R10, R11
	JGE  z4
	VBROADCASTSD (R15)(R10*8), Y8
	VMULPD (R12), Y8, Y9
	VADDPD Y9, Y0, Y0
	ADDQ BX, R12
	INCQ R10
	JMP  l4tail

z4:
	VADDPD Y1, Y0, Y0
	VADDPD Y3, Y2, Y2
	VADDPD Y2, Y0, Y0
	VMULPD Y0, Y0, Y0
	VADDPD Y0, Y10, Y10
	ADDQ R11, R8
	INCQ R9
	JMP  j4

store4:
	VMOVUPD Y10, (R13)(AX*8)
	ADDQ $4, AX
	JMP  rows4

done:
	VZEROUPPER
	RET

// func addOuterPacked(s, dk *float64, d int, r float64)
//
// For j < d: rd = r·dk[j]; s[o+l] += rd·dk[l] for l ≤ j, o = j(j+1)/2
// (the packed lower triangle of r·dk·dkᵀ added to s), each product rounded
// before its addition: chunkFull's moment update, four entries per
// instruction.
TEXT ·addOuterPacked(SB), NOSPLIT, $0-32
	MOVQ s+0(FP), DI
	MOVQ dk+8(FP), SI
	MOVQ d+16(FP), CX
	VMOVSD r+24(FP), X15
	XORQ R9, R9                 // j

outerRow:
	CMPQ R9, CX
	JGE  outerDone
	VMOVSD (SI)(R9*8), X0
	VMULSD X15, X0, X0          // rd = r·dk[j]
	VBROADCASTSD X0, Y1
	LEAQ 1(R9), R11             // row length
	XORQ R10, R10               // l

outerQuad:
	LEAQ 4(R10), R12
	CMPQ R12, R11
	JGT  outerTail
	VMULPD (SI)(R10*8), Y1, Y2
	VADDPD (DI)(R10*8), Y2, Y2
	VMOVUPD Y2, (DI)(R10*8)
	MOVQ R12, R10
	JMP  outerQuad

outerTail:
	CMPQ R10, R11
	JGE  outerNext
	VMOVSD (SI)(R10*8), X2
	VMULSD X0, X2, X2
	VADDSD (DI)(R10*8), X2, X2
	VMOVSD X2, (DI)(R10*8)
	INCQ R10
	JMP  outerTail

outerNext:
	LEAQ (DI)(R11*8), DI        // next packed row
	INCQ R9
	JMP  outerRow

outerDone:
	VZEROUPPER
	RET
