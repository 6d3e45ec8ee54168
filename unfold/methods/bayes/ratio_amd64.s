//go:build !purego

#include "textflag.h"

// The loops of ratios in 256-bit AVX, four reco bins per step: every lane
// does the scalar operations of ratiosGo in its order: the add f + b
// (VADDPD), the division n / ν (VDIVPD, correctly rounded like the scalar
// DIVSD), the test ν > 0 (VCMPPD, ordered: false for NaN) and 0 where it
// fails (VANDPD with the mask, +0 as the Go loop writes). A NaN ν gives
// 0 in both, so the payload of the add does not matter. The callers pass
// lengths that are multiples of 4 and check them.

// func ratiosBgAVX(y, f, b, n *float64, m int)
TEXT ·ratiosBgAVX(SB), NOSPLIT, $0-40
	MOVQ y+0(FP), DI
	MOVQ f+8(FP), SI
	MOVQ b+16(FP), DX
	MOVQ n+24(FP), R8
	MOVQ m+32(FP), CX
	VXORPD Y15, Y15, Y15
	XORQ AX, AX
	TESTQ CX, CX
	JZ bgdone

bgloop:
	VMOVUPD (SI)(AX*8), Y0
	VADDPD (DX)(AX*8), Y0, Y0
	VMOVUPD (R8)(AX*8), Y1
	VDIVPD Y0, Y1, Y2
	VCMPPD $0x1e, Y15, Y0, Y3
	VANDPD Y2, Y3, Y2
	VMOVUPD Y2, (DI)(AX*8)
	ADDQ $4, AX
	CMPQ AX, CX
	JB bgloop

bgdone:
	VZEROUPPER
	RET

// func ratiosAVX(y, f, n *float64, m int)
TEXT ·ratiosAVX(SB), NOSPLIT, $0-32
	MOVQ y+0(FP), DI
	MOVQ f+8(FP), SI
	MOVQ n+16(FP), R8
	MOVQ m+24(FP), CX
	VXORPD Y15, Y15, Y15
	XORQ AX, AX
	TESTQ CX, CX
	JZ done

loop:
	VMOVUPD (SI)(AX*8), Y0
	VMOVUPD (R8)(AX*8), Y1
	VDIVPD Y0, Y1, Y2
	VCMPPD $0x1e, Y15, Y0, Y3
	VANDPD Y2, Y3, Y2
	VMOVUPD Y2, (DI)(AX*8)
	ADDQ $4, AX
	CMPQ AX, CX
	JB loop

done:
	VZEROUPPER
	RET
