//go:build !purego

#include "textflag.h"

// The loops of sweep8 in 256-bit AVX: every vector of the 8 interleaved
// ones is one lane of a pair of Y registers, so each lane does exactly
// the scalar operations of sweep8Go, in its order: a multiply (VMULPD),
// then an add (VADDPD), never a fused multiply-add. Where two NaNs meet
// in an add, x86 returns the first source's payload, so the adds take
// their operands in the order the Go compiler emits for sweep8Go
// (product first, then the sum it is added to). The order of the
// multiplies does not matter: matrix values are finite.

// func gather8(dst *[8]float64, y *float64, ri []int, v []float64)
TEXT ·gather8(SB), NOSPLIT, $0-64
	MOVQ dst+0(FP), DI
	MOVQ y+8(FP), SI
	MOVQ ri_base+16(FP), R8
	MOVQ ri_len+24(FP), CX
	MOVQ v_base+40(FP), R9

	// chain q (k mod 4) of lanes 0-3 in Y(2q), of lanes 4-7 in Y(2q+1)
	VXORPD Y0, Y0, Y0
	VXORPD Y1, Y1, Y1
	VXORPD Y2, Y2, Y2
	VXORPD Y3, Y3, Y3
	VXORPD Y4, Y4, Y4
	VXORPD Y5, Y5, Y5
	VXORPD Y6, Y6, Y6
	VXORPD Y7, Y7, Y7

	MOVQ CX, DX
	ANDQ $-4, DX // non-zeros in whole groups of 4
	XORQ AX, AX
	CMPQ AX, DX
	JGE  tail

loop4:
	MOVQ         (R8)(AX*8), BX
	SHLQ         $6, BX
	VBROADCASTSD (R9)(AX*8), Y8
	VMULPD       (SI)(BX*1), Y8, Y9
	VMULPD       32(SI)(BX*1), Y8, Y10
	VADDPD       Y0, Y9, Y0
	VADDPD       Y1, Y10, Y1

	MOVQ         8(R8)(AX*8), BX
	SHLQ         $6, BX
	VBROADCASTSD 8(R9)(AX*8), Y11
	VMULPD       (SI)(BX*1), Y11, Y12
	VMULPD       32(SI)(BX*1), Y11, Y13
	VADDPD       Y2, Y12, Y2
	VADDPD       Y3, Y13, Y3

	MOVQ         16(R8)(AX*8), BX
	SHLQ         $6, BX
	VBROADCASTSD 16(R9)(AX*8), Y8
	VMULPD       (SI)(BX*1), Y8, Y9
	VMULPD       32(SI)(BX*1), Y8, Y10
	VADDPD       Y4, Y9, Y4
	VADDPD       Y5, Y10, Y5

	MOVQ         24(R8)(AX*8), BX
	SHLQ         $6, BX
	VBROADCASTSD 24(R9)(AX*8), Y11
	VMULPD       (SI)(BX*1), Y11, Y12
	VMULPD       32(SI)(BX*1), Y11, Y13
	VADDPD       Y6, Y12, Y6
	VADDPD       Y7, Y13, Y7

	ADDQ $4, AX
	CMPQ AX, DX
	JLT  loop4

tail:
	// the last len(ri) mod 4 non-zeros into chain 0
	CMPQ AX, CX
	JGE  sum

tailloop:
	MOVQ         (R8)(AX*8), BX
	SHLQ         $6, BX
	VBROADCASTSD (R9)(AX*8), Y8
	VMULPD       (SI)(BX*1), Y8, Y9
	VMULPD       32(SI)(BX*1), Y8, Y10
	VADDPD       Y0, Y9, Y0
	VADDPD       Y1, Y10, Y1
	INCQ         AX
	CMPQ         AX, CX
	JLT          tailloop

sum:
	// (s0+s1)+(s2+s3), each add in the Go compiler's operand order:
	// s1 + s0, s3 + s2, then the first of these plus the second
	VADDPD  Y0, Y2, Y0
	VADDPD  Y1, Y3, Y1
	VADDPD  Y4, Y6, Y4
	VADDPD  Y5, Y7, Y5
	VADDPD  Y4, Y0, Y0
	VADDPD  Y5, Y1, Y1
	VMOVUPD Y0, (DI)
	VMOVUPD Y1, 32(DI)
	VZEROUPPER
	RET

// func scatter8(d *float64, lo int, ri []int, v []float64, x *[8]float64)
TEXT ·scatter8(SB), NOSPLIT, $0-72
	MOVQ d+0(FP), DI
	MOVQ lo+8(FP), DX
	MOVQ ri_base+16(FP), R8
	MOVQ ri_len+24(FP), CX
	MOVQ v_base+40(FP), R9
	MOVQ x+64(FP), SI

	VMOVUPD (SI), Y0
	VMOVUPD 32(SI), Y1
	SHLQ    $6, DX
	NEGQ    DX    // byte offset of row i is 64·i - 64·lo
	XORQ    AX, AX
	CMPQ    AX, CX
	JGE     done

loop:
	MOVQ         (R8)(AX*8), BX
	SHLQ         $6, BX
	ADDQ         DX, BX
	VBROADCASTSD (R9)(AX*8), Y8
	VMULPD       Y8, Y0, Y9
	VMULPD       Y8, Y1, Y10
	VADDPD       (DI)(BX*1), Y9, Y9
	VADDPD       32(DI)(BX*1), Y10, Y10
	VMOVUPD      Y9, (DI)(BX*1)
	VMOVUPD      Y10, 32(DI)(BX*1)
	INCQ         AX
	CMPQ         AX, CX
	JLT          loop

done:
	VZEROUPPER
	RET
