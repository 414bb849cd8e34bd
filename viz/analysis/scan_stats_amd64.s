//go:build amd64 && !purego

#include "textflag.h"

// func maxSumAVX(p *float32, n int) (mx, sum float32)
TEXT ·maxSumAVX(SB), NOSPLIT, $0-24
	MOVQ p+0(FP), SI
	MOVQ n+8(FP), CX
	VBROADCASTSS (SI), Y0
	VMOVUPS Y0, Y1
	VMOVUPS Y0, Y2
	VMOVUPS Y0, Y3
	VXORPS  Y4, Y4, Y4
	VXORPS  Y5, Y5, Y5
	VXORPS  Y6, Y6, Y6
	VXORPS  Y7, Y7, Y7

loop:
	VMOVUPS (SI), Y8
	VMOVUPS 32(SI), Y9
	VMOVUPS 64(SI), Y10
	VMOVUPS 96(SI), Y11
	VMAXPS  Y8, Y0, Y0
	VMAXPS  Y9, Y1, Y1
	VMAXPS  Y10, Y2, Y2
	VMAXPS  Y11, Y3, Y3
	VADDPS  Y8, Y4, Y4
	VADDPS  Y9, Y5, Y5
	VADDPS  Y10, Y6, Y6
	VADDPS  Y11, Y7, Y7
	ADDQ    $128, SI
	SUBQ    $32, CX
	JNZ     loop

	// Four accumulators to one, 256 bits to 128, then across the lanes.
	VMAXPS       Y1, Y0, Y0
	VMAXPS       Y3, Y2, Y2
	VMAXPS       Y2, Y0, Y0
	VADDPS       Y5, Y4, Y4
	VADDPS       Y7, Y6, Y6
	VADDPS       Y6, Y4, Y4
	VEXTRACTF128 $1, Y0, X1
	VMAXPS       X1, X0, X0
	VEXTRACTF128 $1, Y4, X5
	VADDPS       X5, X4, X4
	VPERMILPS    $0x4E, X0, X1
	VMAXPS       X1, X0, X0
	VPERMILPS    $0xB1, X0, X1
	VMAXPS       X1, X0, X0
	VPERMILPS    $0x4E, X4, X5
	VADDPS       X5, X4, X4
	VPERMILPS    $0xB1, X4, X5
	VADDPS       X5, X4, X4
	VZEROUPPER
	MOVSS        X0, mx+16(FP)
	MOVSS        X4, sum+20(FP)
	RET
