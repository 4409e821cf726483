//go:build !noasm

#include "textflag.h"

// Rectifier loops over n elements, n a multiple of the vector width (8
// float32 or 4 float64 per 256-bit register); elementwise.go handles the
// rest and states what they compute.

// func reluF32(x, y *float32, n int)
TEXT ·reluF32(SB), NOSPLIT, $0-24
	MOVQ x+0(FP), SI
	MOVQ y+8(FP), DI
	MOVQ n+16(FP), CX
	SHRQ $3, CX
	JZ reluF32_done
	VXORPS Y15, Y15, Y15
reluF32_loop:
	VMOVUPS (SI), Y0
	VMAXPS Y0, Y15, Y0
	VADDPS Y15, Y0, Y0
	VMOVUPS Y0, (DI)
	ADDQ $32, SI
	ADDQ $32, DI
	DECQ CX
	JNZ reluF32_loop
	VZEROUPPER
reluF32_done:
	RET

// func reluF64(x, y *float64, n int)
TEXT ·reluF64(SB), NOSPLIT, $0-24
	MOVQ x+0(FP), SI
	MOVQ y+8(FP), DI
	MOVQ n+16(FP), CX
	SHRQ $2, CX
	JZ reluF64_done
	VXORPD Y15, Y15, Y15
reluF64_loop:
	VMOVUPD (SI), Y0
	VMAXPD Y0, Y15, Y0
	VADDPD Y15, Y0, Y0
	VMOVUPD Y0, (DI)
	ADDQ $32, SI
	ADDQ $32, DI
	DECQ CX
	JNZ reluF64_loop
	VZEROUPPER
reluF64_done:
	RET

// func maskF32(x, dy, dx *float32, n int)
TEXT ·maskF32(SB), NOSPLIT, $0-32
	MOVQ x+0(FP), SI
	MOVQ dy+8(FP), BX
	MOVQ dx+16(FP), DI
	MOVQ n+24(FP), CX
	SHRQ $3, CX
	JZ maskF32_done
	VXORPS Y15, Y15, Y15
maskF32_loop:
	VMOVUPS (SI), Y0
	VCMPPS $0x1e, Y15, Y0, Y0 // x > 0, ordered, quiet: false for NaN
	VANDPS (BX), Y0, Y0
	VMOVUPS Y0, (DI)
	ADDQ $32, SI
	ADDQ $32, BX
	ADDQ $32, DI
	DECQ CX
	JNZ maskF32_loop
	VZEROUPPER
maskF32_done:
	RET

// func maskF64(x, dy, dx *float64, n int)
TEXT ·maskF64(SB), NOSPLIT, $0-32
	MOVQ x+0(FP), SI
	MOVQ dy+8(FP), BX
	MOVQ dx+16(FP), DI
	MOVQ n+24(FP), CX
	SHRQ $2, CX
	JZ maskF64_done
	VXORPD Y15, Y15, Y15
maskF64_loop:
	VMOVUPD (SI), Y0
	VCMPPD $0x1e, Y15, Y0, Y0
	VANDPD (BX), Y0, Y0
	VMOVUPD Y0, (DI)
	ADDQ $32, SI
	ADDQ $32, BX
	ADDQ $32, DI
	DECQ CX
	JNZ maskF64_loop
	VZEROUPPER
maskF64_done:
	RET
